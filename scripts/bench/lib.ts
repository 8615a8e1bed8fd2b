/** Small helpers shared by the benchmarks. */
import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import os from 'node:os';

export const ROOT = resolve(import.meta.dirname, '../..');

export function arg(name: string, fallback: string): string {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
}

/**
 * Load the env file of the services this benchmark runs against: $ENV_FILE, else
 * $CROSSTALLY_DATA_DIR/crosstally.env (npm run bench sets both to .data/bench).
 */
export function loadBenchEnv(name: string): void {
	const dataDir = process.env.CROSSTALLY_DATA_DIR ?? join(ROOT, '.data/bench');
	const file = process.env.ENV_FILE ?? join(dataDir, 'crosstally.env');
	if (!existsSync(file)) {
		console.error(`bench:${name}: no ${file}; run \`npm run bench\` (it starts its own services), or start them with scripts/bench/stack.sh services`);
		process.exit(2);
	}
	process.loadEnvFile(file);
}

export const baseUrl = () => process.env.ORIGIN ?? `http://localhost:${process.env.PORT ?? 3071}`;

export function machine() {
	return {
		cores: os.cpus().length,
		cpu: os.cpus()[0]?.model ?? '?',
		mem_gb: Math.round(os.totalmem() / 2 ** 30),
		node: process.version,
		date: new Date().toISOString()
	};
}

/** Print the BENCH_JSON line and write the full result to .bench/<name>.json. */
export function emit(name: string, result: Record<string, unknown>, out = arg('out', `.bench/${name}.json`)): void {
	const line = JSON.stringify({ bench: name, ...result });
	console.log(`BENCH_JSON ${line}`);
	mkdirSync(dirname(out), { recursive: true });
	writeFileSync(out, line + '\n');
}

export const median = (xs: number[]) => {
	const s = [...xs].sort((a, b) => a - b);
	return s.length === 0 ? NaN : s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};
export const pct = (xs: number[], p: number) => {
	const s = [...xs].sort((a, b) => a - b);
	return s[Math.min(s.length - 1, Math.floor((p / 100) * s.length))];
};
export const r1 = (x: number) => Math.round(x * 10) / 10;
export const r2 = (x: number) => Math.round(x * 100) / 100;

/** A failure as text, with the database's own error (errno, SQL state, message) when there is one. */
export function describeError(e: unknown): string {
	if (!(e instanceof Error)) return String(e);
	const o = (e as { original?: Record<string, unknown>; parent?: Record<string, unknown> }).original ?? (e as { parent?: Record<string, unknown> }).parent;
	const db = o ? ` [MariaDB errno ${o.errno ?? '?'} ${o.sqlState ?? o.code ?? ''}: ${o.sqlMessage ?? o.text ?? o.message ?? '?'}]` : '';
	const sql = (e as { sql?: string }).sql;
	return `${e.name}: ${e.message}${db}${sql ? `\n  in: ${sql.replace(/\s+/g, ' ').slice(0, 300)}` : ''}\n${e.stack ?? ''}`;
}

/**
 * `npm run bench` — every benchmark in one run, on a stack of its own:
 *   1. scripts/bench/stack.sh services: MariaDB, Redis and the mail fake in .data/bench with their
 *      own ports (a fresh database, migrations, the test accounts and the demo catalog);
 *   2. bench:reconcile (in process), bench:mail (its own worker), bench:audit (seeds ~5M fields);
 *   3. stack.sh app: build when stale (into .data/bench/build), start the app and the worker;
 *   4. bench:http, bench:pages, bench:db against that app and database;
 *   5. stack.sh down: stop every process it started, by PID file — also on failure or Ctrl-C.
 * Prints one table (with the core count and date) and writes it, with every benchmark's own JSON,
 * to .bench/all.json; appends the run's figures to .bench/history.jsonl and shows, beside each
 * ratio, the change against the latest earlier run of the same size (full or --quick). Each benchmark's BENCH_JSON line is read from its output.
 *
 * Defaults (each overridable from the environment): CROSSTALLY_DATA_DIR=.data/bench DB_PORT=3371
 * REDIS_PORT=6471 SMTP_PORT=2671 MAILFAKE_PORT=2672 PORT=3071 CROSSTALLY_BUILD_DIR=.data/bench/build
 * CROSSTALLY_KIT_DIR=.data/bench/kit DB_NAME=crosstally_bench.
 * Options: --only reconcile,mail,audit,http,pages,db   --quick (smaller data sizes)
 *          --keep-data (reuse the bench database, e.g. the audit seed)   --keep-running (no down)
 */
import { spawn } from 'node:child_process';
import { appendFileSync, existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import os from 'node:os';
import { performance } from 'node:perf_hooks';
import { ROOT, arg } from './lib';

const defaults: Record<string, string> = {
	CROSSTALLY_MODE: 'test',
	CROSSTALLY_DATA_DIR: join(ROOT, '.data/bench'),
	DB_PORT: '3371',
	REDIS_PORT: '6471',
	SMTP_PORT: '2671',
	MAILFAKE_PORT: '2672',
	PORT: '3071',
	CROSSTALLY_BUILD_DIR: '.data/bench/build',
	CROSSTALLY_KIT_DIR: '.data/bench/kit',
	DB_NAME: 'crosstally_bench'
};
for (const [k, v] of Object.entries(defaults)) process.env[k] ??= v;
if (process.argv.includes('--keep-data')) process.env.BENCH_KEEP_DATA = '1';
const ALL = ['reconcile', 'mail', 'audit', 'http', 'pages', 'db'] as const;
type Name = (typeof ALL)[number];
const only = new Set(
	arg('only', ALL.join(','))
		.split(',')
		.map((s) => s.trim()) as Name[]
);
const QUICK = process.argv.includes('--quick');
const sizes: Record<Name, string[]> = QUICK
	? {
			reconcile: ['--protocols', '2000'],
			mail: ['--protocols', '200'],
			audit: ['--protocols', '2000', '--runs', '3'],
			http: ['--submits', '100', '--resolutions', '400', '--duration', '4'],
			pages: ['--runs', '3'],
			db: []
		}
	: { reconcile: [], mail: [], audit: [], http: [], pages: [], db: [] };
const log = (s: string) => console.error(`\x1b[1m[bench]\x1b[0m ${s}`);

/** Run a command with the bench environment; stdout is echoed to stderr and returned. */
function run(cmd: string, args: string[]): Promise<{ code: number; out: string }> {
	return new Promise((resolve) => {
		const child = spawn(cmd, args, { cwd: ROOT, env: process.env, stdio: ['ignore', 'pipe', 'inherit'] });
		let out = '';
		child.stdout.on('data', (b: Buffer) => {
			out += b;
			process.stderr.write(b);
		});
		child.on('close', (code) => resolve({ code: code ?? 1, out }));
	});
}
const stack = (what: string) => run('bash', ['scripts/bench/stack.sh', what]);

// each bench prints its own JSON shape; the table below reads it field by field
// eslint-disable-next-line @typescript-eslint/no-explicit-any
const results: Partial<Record<Name, Record<string, any>>> = {};
const failures: string[] = [];
async function bench(name: Name) {
	if (!only.has(name)) return;
	log(`bench:${name} ${sizes[name].join(' ')}`);
	const t0 = performance.now();
	const r = await run(join(ROOT, 'node_modules/.bin/tsx'), [`scripts/bench/${name}.ts`, ...sizes[name]]);
	const line = r.out
		.split('\n')
		.reverse()
		.find((l) => l.startsWith('BENCH_JSON '));
	if (r.code !== 0 || !line) failures.push(`${name} (exit ${r.code}${line ? '' : ', no BENCH_JSON'})`);
	if (line) results[name] = { ...JSON.parse(line.slice('BENCH_JSON '.length)), seconds: Math.round((performance.now() - t0) / 1000) };
}

let stopping = false;
async function down() {
	if (stopping || process.argv.includes('--keep-running')) return;
	stopping = true;
	log('stopping the bench stack');
	await stack('down');
}
for (const sig of ['SIGINT', 'SIGTERM'] as const) process.on(sig, () => void down().then(() => process.exit(130)));

type Row = {
	key: string;
	area: string;
	figure: string;
	value: string;
	floor: string;
	ratio: string;
	change?: string;
	metric?: number;
	unit?: string;
	goal: string;
	met: string;
};
function table(): Row[] {
	const rows: Row[] = [];
	const f = (x: number | undefined, d = 1) => (x === undefined || x === null || Number.isNaN(x) ? '—' : Number(x).toFixed(d));
	const yes = (b: boolean | undefined) => (b === undefined ? '' : b ? 'yes' : 'NO');
	const r = results;
	if (r.reconcile)
		rows.push({
			key: 'reconcile.engine',
			area: 'reconcile',
			figure: `engine, ${r.reconcile.protocols} protocols (${r.reconcile.engine_protocols_per_s}/s)`,
			value: `${f(r.reconcile.engine_ms)} ms`,
			floor: `${f(r.reconcile.floor_ms)} ms JSON parse+stringify`,
			ratio: f(r.reconcile.ratio, 2),
			goal: '≤ 3',
			met: yes(r.reconcile.ratio <= 3)
		});
	if (r.reconcile?.forms)
		rows.push({
			key: 'reconcile.forms',
			area: 'reconcile',
			figure: `engine, tables/regression/bands/composites, ${r.reconcile.forms.protocols} protocols (${r.reconcile.forms.engine_protocols_per_s}/s)`,
			value: `${f(r.reconcile.forms.engine_ms)} ms`,
			floor: `${f(r.reconcile.forms.floor_ms)} ms JSON parse+stringify`,
			ratio: f(r.reconcile.forms.ratio, 2),
			goal: '≤ 3',
			met: yes(r.reconcile.forms.ratio <= 3)
		});
	if (r.mail)
		rows.push({
			key: 'mail',
			metric: r.mail.emails_per_second,
			unit: '/s',
			area: 'mail',
			figure: `${r.mail.protocols} first e-mails caught`,
			value: `${f(r.mail.all_caught_ms, 0)} ms (${r.mail.emails_per_second}/s, p95 ${r.mail.latency_ms?.p95} ms)`,
			floor: 'none measured',
			ratio: '—',
			goal: 'no duplicates',
			met: yes(r.mail.duplicates === 0)
		});
	if (r.audit)
		rows.push({
			key: 'audit',
			metric: r.audit.worst_ms,
			unit: ' ms',
			area: 'audit',
			figure: `slowest report over ${r.audit.data?.fields_entered ?? '?'} fields`,
			value: `${f(r.audit.worst_ms)} ms`,
			floor: '—',
			ratio: '—',
			goal: '< 300 ms',
			met: yes(r.audit.ok)
		});
	if (r.http) {
		for (const g of r.http.goals ?? []) {
			const x = (r.http.results ?? []).find((y: { route: string }) => y.route === g.route) ?? {};
			rows.push({
				key: `http ${g.route}`,
				area: 'http',
				figure: `${g.route} p50/p95/p99, req/s`,
				value: `${f(x.p50)}/${f(x.p95)}/${f(x.p99)} ms, ${x.rps}/s`,
				floor: `${g.floor ?? '/health'} p95 ${f(g.floor_p95)} ms`,
				ratio: f(g.ratio, 2),
				goal: `≤ ${g.goal}×`,
				met: yes(g.met)
			});
		}
	}
	if (r.pages) {
		for (const p of r.pages.pages ?? [])
			rows.push({
				key: `pages ${p.page}`,
				area: 'pages',
				figure: `${p.page}: JS gzip, CLS`,
				value: `${f(p.js_gzip_bytes / 1024)} KB, CLS ${f(p.cls, 3)}`,
				floor: '',
				ratio: '',
				goal: p.page.startsWith('Entry') ? '< 100 KB' : '',
				met: p.page.startsWith('Entry') ? yes(p.js_gzip_bytes < 102400) : ''
			});
		const e = r.pages.entry ?? {};
		rows.push({
			key: 'pages.tti',
			area: 'pages',
			figure: 'Entry (60 fields) time to interactive',
			value: `${f(e.tti_ms, 0)} ms`,
			floor: `sign-in ${f(e.floor_tti_ms, 0)} ms`,
			ratio: f(e.tti_ratio, 2),
			goal: '',
			met: ''
		});
		const k = r.pages.keystroke ?? {};
		rows.push({
			key: 'pages.keystroke',
			area: 'pages',
			figure: 'Enter → next field (focus; next frame) median/p95',
			value: `${f(k.focus_median_ms, 2)}/${f(k.focus_p95_ms, 2)} ms; ${f(k.frame_median_ms)}/${f(k.frame_p95_ms)} ms`,
			floor: 'one frame ≈ 16.7 ms',
			ratio: f(k.frame_median_ms / 16.7, 2),
			goal: '',
			met: ''
		});
	}
	if (r.db)
		rows.push({
			key: 'db',
			area: 'db',
			figure: `list + audit queries with EXPLAIN`,
			value: `${r.db.queries} queries, ${r.db.full_scans} full scans (${r.db.optimizer_chosen_scans ?? 0} with a candidate index not taken)`,
			floor: `over ${r.db.data?.protocols} protocols`,
			ratio: '—',
			goal: '0 full scans',
			met: yes(r.db.ok)
		});
	const rt = r.db?.round_trip;
	if (rt?.socket_ms)
		rows.push({
			key: 'db.round_trip',
			area: 'db',
			figure: 'one round trip to MariaDB (primary-key SELECT): Unix socket, as the app connects, vs loopback TCP',
			value: `${f(rt.socket_ms, 3)} ms (client CPU ${f(rt.socket_cpu_ms, 3)} ms)`,
			floor: `TCP ${f(rt.tcp_ms, 3)} ms (${f(rt.tcp_cpu_ms, 3)} ms)`,
			ratio: f(rt.socket_ms / rt.tcp_ms, 2),
			metric: rt.socket_ms / rt.tcp_ms,
			goal: '< 1 (informational)',
			met: yes(rt.socket_ms < rt.tcp_ms)
		});
	return rows;
}

const HISTORY = join(ROOT, '.bench/history.jsonl');
type HistoryRun = { date: string; quick: boolean; rows: { key: string; ratio: string; metric?: number; value: string }[] };
/** The earlier runs of the same size (full or --quick) from .bench/history.jsonl, newest first. */
function earlierRuns(quick: boolean): HistoryRun[] {
	if (!existsSync(HISTORY)) return [];
	const runs = readFileSync(HISTORY, 'utf8')
		.split('\n')
		.filter(Boolean)
		.flatMap((l) => {
			try {
				return [JSON.parse(l) as HistoryRun];
			} catch {
				return [];
			}
		});
	return runs.reverse().filter((x) => x.quick === quick);
}
/**
 * "+0.31 (was 2.40, 13:58)" against the latest earlier run that measured this figure (a run with
 * --only measures some), by its ratio, or its headline figure where there is no ratio.
 */
function change(r: Row, earlier: HistoryRun[]): string {
	const run = earlier.find((x) => x.rows.some((y) => y.key === r.key));
	const p = run?.rows.find((x) => x.key === r.key);
	if (!run || !p) return earlier.length ? 'new' : '';
	const when = run.date.slice(11, 16);
	const now = Number(r.ratio),
		before = Number(p.ratio);
	if (r.ratio !== '' && !Number.isNaN(now) && !Number.isNaN(before)) {
		const d = now - before;
		return `${d >= 0 ? '+' : ''}${d.toFixed(2)} (was ${before.toFixed(2)} at ${when}, ${before ? (d >= 0 ? '+' : '') + Math.round((100 * d) / before) : '?'} %)`;
	}
	if (r.metric !== undefined && p.metric !== undefined && p.metric !== null) {
		const d = r.metric - p.metric;
		return `${d >= 0 ? '+' : ''}${Math.round(d * 10) / 10}${r.unit ?? ''} (was ${p.metric}${r.unit ?? ''} at ${when})`;
	}
	return '';
}

async function main() {
	const started = new Date();
	const cores = os.cpus().length;
	log(`${cores} cores, data in ${process.env.CROSSTALLY_DATA_DIR}, app port ${process.env.PORT}, database port ${process.env.DB_PORT}`);
	const needServices = [...only].some((n) => n !== 'reconcile');
	try {
		if (needServices) {
			const s = await stack('services');
			if (s.code !== 0) throw new Error('the bench services did not start');
			process.loadEnvFile(join(process.env.CROSSTALLY_DATA_DIR!, 'crosstally.env'));
		}
		await bench('reconcile');
		await bench('mail'); // before the app's worker starts: it runs its own
		await bench('audit');
		if (['http', 'pages', 'db'].some((n) => only.has(n as Name))) {
			const a = await stack('app');
			if (a.code !== 0) throw new Error('the app did not start');
		}
		await bench('http');
		await bench('pages');
		await bench('db');
	} catch (e) {
		failures.push(e instanceof Error ? e.message : String(e));
	} finally {
		if (needServices) await down();
	}

	const rows = table();
	const earlier = earlierRuns(QUICK);
	const previous = earlier[0];
	for (const r of rows) r.change = change(r, earlier);
	const widths = (['area', 'figure', 'value', 'floor', 'ratio', 'change', 'goal', 'met'] as const).map((k) =>
		Math.max(k.length, ...rows.map((r) => r[k].length))
	);
	const line = (r: Record<string, unknown>) =>
		(['area', 'figure', 'value', 'floor', 'ratio', 'change', 'goal', 'met'] as const).map((k, i) => String(r[k] ?? '').padEnd(widths[i])).join('  ');
	console.log(
		`\nCrosstally benchmarks — ${started.toISOString().slice(0, 16).replace('T', ' ')} UTC, ${cores} cores (${os.cpus()[0]?.model ?? '?'}), ${Math.round(os.totalmem() / 2 ** 30)} GB, Node ${process.version}${QUICK ? ', --quick sizes' : ''}\n`
	);
	console.log(
		line({
			area: 'area',
			figure: 'figure',
			value: 'value',
			floor: 'floor (same run)',
			ratio: 'ratio',
			change: previous ? 'vs the last run that measured it' : 'change',
			goal: 'goal',
			met: 'met'
		})
	);
	for (const r of rows) console.log(line(r));
	if (failures.length) console.log(`\nFAILED: ${failures.join('; ')}`);
	mkdirSync(join(ROOT, '.bench'), { recursive: true });
	const out = {
		date: started.toISOString(),
		cores,
		cpu: os.cpus()[0]?.model,
		mem_gb: Math.round(os.totalmem() / 2 ** 30),
		node: process.version,
		quick: QUICK,
		table: rows,
		failures,
		results
	};
	writeFileSync(join(ROOT, '.bench/all.json'), JSON.stringify(out, null, 2) + '\n');
	// one line per run, figures only, so the next run can show its change against this one
	appendFileSync(
		HISTORY,
		JSON.stringify({
			date: out.date,
			cores,
			quick: QUICK,
			only: [...only],
			failures,
			rows: rows.map(({ key, ratio, metric, value }) => ({ key, ratio, metric, value }))
		}) + '\n'
	);
	console.log(
		`\nwritten to .bench/all.json; figures appended to .bench/history.jsonl${previous ? ' (each change against the latest earlier run that measured that figure)' : ' (no earlier run to compare with)'}`
	);
	process.exitCode = failures.length ? 1 : 0;
}

main();

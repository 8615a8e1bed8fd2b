/**
 * The batch command in tests. Every test calls a command's `run(input, output, errors)` in process
 * (`runCommand`), as scripts/crosstally.ts does; one smoke test (tests/unit/scoring-cli.test.ts)
 * goes through the real command line (`commandLine`) to check the wiring, exit codes and stderr.
 */
import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import path from 'node:path';
import { PassThrough, Readable } from 'node:stream';

export interface Outcome {
	code: number | null;
	stdout: string;
	stderr: string;
}

type Run = (input: Readable, output: PassThrough, errors: PassThrough) => Promise<number>;
const commands: Record<string, () => Promise<{ run: Run }>> = {
	reconcile: () => import('../../scripts/cli/reconcile'),
	agreement: () => import('../../scripts/cli/agreement'),
	kinds: () => import('../../scripts/cli/kinds')
};

/** Run a command in process: `input` as stdin (one chunk, or the chunks given), with extra environment. */
export async function runCommand(name: keyof typeof commands, input: string | (string | Uint8Array)[], env: Record<string, string> = {}): Promise<Outcome> {
	const { run } = await commands[name]();
	const out = new PassThrough();
	const err = new PassThrough();
	let stdout = '';
	let stderr = '';
	out.setEncoding('utf8').on('data', (d: string) => (stdout += d));
	err.setEncoding('utf8').on('data', (d: string) => (stderr += d));
	const saved = Object.fromEntries(Object.keys(env).map((k) => [k, process.env[k]]));
	Object.assign(process.env, env);
	try {
		const chunks = (typeof input === 'string' ? [input] : input).map((c) => Buffer.from(c));
		const code = await run(Readable.from(chunks), out, err);
		await new Promise((r) => setImmediate(r));
		return { code, stdout, stderr };
	} finally {
		for (const [k, v] of Object.entries(saved)) {
			if (v === undefined) delete process.env[k];
			else process.env[k] = v;
		}
	}
}

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');

/** The command as users run it: `tsx scripts/crosstally.ts <name> < input`, in a child process. */
export function commandLine(name: string, input: string): Promise<Outcome> {
	return new Promise((resolve, reject) => {
		const child = spawn(path.join(root, 'node_modules/.bin/tsx'), ['scripts/crosstally.ts', name], { cwd: root, stdio: ['pipe', 'pipe', 'pipe'] });
		let stdout = '';
		let stderr = '';
		child.stdout.setEncoding('utf8').on('data', (d: string) => (stdout += d));
		child.stderr.setEncoding('utf8').on('data', (d: string) => (stderr += d));
		child.on('error', reject);
		child.on('close', (code) => resolve({ code, stdout, stderr }));
		child.stdin.on('error', () => {}); // the command may stop reading at the first bad element
		child.stdin.end(input);
	});
}

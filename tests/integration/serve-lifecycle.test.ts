/**
 * scripts/serve.js with APP_PROCESSES=2 (a node:cluster primary and two copies of the built app):
 * a SIGTERM or SIGINT to the primary ends the primary and both copies within a bound, also with an
 * idle keep-alive connection open to each copy, and frees the port; a KILLed primary takes its copies
 * with it; a copy that dies is replaced, but not once the primary is stopping.
 *
 * Before the fix a TERM ended nothing: adapter-node's graceful shutdown waits for the event loop to
 * drain, and a copy's IPC channel to the primary kept it alive (two copies ran for 2 hours). Every
 * process here is started by this file, in its own process group, and signalled only by its PID.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, openSync, readFileSync } from 'node:fs';
import net from 'node:net';
import { join, resolve } from 'node:path';
import { childrenOf, envFile, freePort, portClosed, runDir, running, workerEnv } from '../helpers/services';

const ROOT = resolve(import.meta.dirname, '../..');
const BOUND_MS = 15_000; // SHUTDOWN_TIMEOUT is 10 s, but with nothing in flight the stop should take well under a second
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** Milliseconds until cond() holds, or null after ms. */
async function within(ms: number, cond: () => boolean | Promise<boolean>): Promise<number | null> {
	const t0 = Date.now();
	for (;;) {
		if (await cond()) return Date.now() - t0;
		if (Date.now() - t0 > ms) return null;
		await sleep(50);
	}
}

/** A connection that made one request and then stays open and idle (HTTP/1.1 keep-alive). */
function keepAlive(port: number): Promise<{ socket: net.Socket; closed: Promise<void> }> {
	return new Promise((res, rej) => {
		const socket = net.connect(port, '127.0.0.1');
		const closed = new Promise<void>((r) => socket.once('close', () => r()));
		socket.on('error', () => undefined);
		socket.once('connect', () => socket.write(`GET /health HTTP/1.1\r\nHost: 127.0.0.1:${port}\r\nConnection: keep-alive\r\n\r\n`));
		socket.once('data', (d) => (/^HTTP\/1\.1 200/.test(d.toString()) ? res({ socket, closed }) : rej(new Error(`health: ${d.toString().slice(0, 80)}`))));
	});
}

const listening = (log: string) => (log.match(/^Listening on /gm) ?? []).length;

const started: number[] = [];
afterEach(async () => {
	// whatever a failed test left: only PIDs this file started (the primary and the copies it saw)
	for (const pid of started.splice(0)) if (running(pid)) process.kill(pid, 'SIGKILL');
});

interface Served {
	port: number;
	primary: number;
	child: ChildProcess;
	exited: Promise<{ code: number | null; signal: string | null }>;
	log: string;
	copies: () => number[];
}

async function serve(): Promise<Served> {
	const port = await freePort();
	const log = join(runDir(), `serve-${port}.log`);
	const fd = openSync(log, 'a');
	const child = spawn(process.execPath, [`--env-file=${envFile()}`, 'scripts/serve.js', process.env.CROSSTALLY_BUILD_DIR ?? 'build'], {
		cwd: ROOT,
		env: { ...workerEnv(), PORT: String(port), ORIGIN: `http://127.0.0.1:${port}`, APP_PROCESSES: '2' },
		stdio: ['ignore', fd, fd],
		detached: true // a process group of its own: nothing here signals a group, but a stray terminal signal never reaches it
	});
	const primary = child.pid!;
	started.push(primary);
	const exited = new Promise<{ code: number | null; signal: string | null }>((r) => child.once('exit', (code, signal) => r({ code, signal })));
	const copies = () => childrenOf(primary).filter(running);
	const text = () => (existsSync(log) ? readFileSync(log, 'utf8') : '');
	// both copies have loaded the app ("Listening on …", adapter-node) and the port answers
	const up = await within(90_000, async () => {
		if (!running(primary)) return true;
		if (copies().length < 2 || listening(text()) < 2) return false;
		try {
			return (await fetch(`http://127.0.0.1:${port}/health`)).ok;
		} catch {
			return false;
		}
	});
	if (up === null || !running(primary)) throw new Error(`serve.js on ${port} did not start:\n${text().slice(-2000)}`);
	started.push(...copies());
	return { port, primary, child, exited, log, copies };
}

describe('scripts/serve.js with two app processes', () => {
	it.each(['SIGTERM', 'SIGINT'] as const)(
		'%s to the primary ends it and both copies, with an idle keep-alive connection open, and frees the port',
		async (signal) => {
			const s = await serve();
			const copies = s.copies();
			expect(copies).toHaveLength(2);
			// two connections: node:cluster hands them out in turn, so each copy most likely holds one
			const held = [await keepAlive(s.port), await keepAlive(s.port)];
			const all = [s.primary, ...copies];
			process.kill(s.primary, signal);
			const took = await within(BOUND_MS, () => all.every((p) => !running(p)));
			console.log(`[serve-lifecycle] ${signal}: primary and 2 copies gone in ${took} ms`);
			expect(took, `still running after ${BOUND_MS} ms: ${all.filter(running).join(', ')}\n${readFileSync(s.log, 'utf8').slice(-1500)}`).not.toBeNull();
			expect(await s.exited).toEqual({ code: 0, signal: null });
			expect(await portClosed(s.port)).toBe(true);
			// the server closed the idle keep-alive connections (the client did not)
			await Promise.all(held.map((h) => h.closed));
		},
		120_000
	);

	it('a KILLed primary takes its copies with it (they see the IPC channel close) and the port is freed', async () => {
		const s = await serve();
		const copies = s.copies();
		expect(copies).toHaveLength(2);
		const held = await keepAlive(s.port);
		process.kill(s.primary, 'SIGKILL');
		const took = await within(BOUND_MS, () => copies.every((p) => !running(p)));
		console.log(`[serve-lifecycle] SIGKILL: both copies gone ${took} ms after their primary`);
		expect(took, `copies still running: ${copies.filter(running).join(', ')}`).not.toBeNull();
		expect(await portClosed(s.port)).toBe(true);
		held.socket.destroy();
	}, 120_000);

	it('a copy that dies is replaced; once the primary is stopping none is started, and all end', async () => {
		const s = await serve();
		const [first, second] = s.copies();
		process.kill(first, 'SIGKILL');
		const replaced = await within(60_000, () => s.copies().some((p) => p !== first && p !== second));
		expect(replaced, 'no copy started in place of the killed one').not.toBeNull();
		const third = s.copies().find((p) => p !== first && p !== second)!;
		started.push(third);
		expect(await within(60_000, async () => (await fetch(`http://127.0.0.1:${s.port}/health`).catch(() => null))?.ok === true)).not.toBeNull();
		// let the new copy finish loading the app (it then listens): a TERM must stop it like the others
		expect(await within(60_000, () => listening(readFileSync(s.log, 'utf8')) >= 3)).not.toBeNull();

		const known = new Set([s.primary, first, second, third]);
		const seen = new Set<number>();
		process.kill(s.primary, 'SIGTERM');
		const took = await within(BOUND_MS, () => {
			for (const p of childrenOf(s.primary)) seen.add(p);
			return [s.primary, second, third].every((p) => !running(p));
		});
		expect(took, `still running: ${[s.primary, second, third].filter(running).join(', ')}`).not.toBeNull();
		expect(
			[...seen].filter((p) => !known.has(p)),
			'copies started during the shutdown'
		).toEqual([]);
		expect(await s.exited).toEqual({ code: 0, signal: null });
		expect(await portClosed(s.port)).toBe(true);
	}, 180_000);
});

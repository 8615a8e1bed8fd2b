/**
 * The mail worker stops by itself on SIGTERM, well before the scripts' KILL (scripts/lib/setup.sh
 * stop_pidfile waits 5 s): idle, and with Redis unreachable. Before the fix, with Redis gone the worker
 * never ended on TERM (BullMQ's Worker.close() waits for the connection) and every stop needed the KILL.
 * It also runs as one process (node --import tsx): the tsx command's wrapper KILLed a worker that did
 * not confirm a relayed TERM within 30 ms.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { readFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { childrenOf, restoreServices, runDir, running, startRedis, startWorker, stopRedis, workerPid } from '../helpers/services';

const BOUND_MS = 3_000;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

afterAll(async () => {
	await startRedis();
	await restoreServices();
}, 180_000);

/** SIGTERM to the worker's PID; milliseconds until it is gone, or null after BOUND_MS. */
async function term(pid: number): Promise<number | null> {
	const t0 = Date.now();
	process.kill(pid, 'SIGTERM');
	while (running(pid)) {
		if (Date.now() - t0 > BOUND_MS) return null;
		await sleep(25);
	}
	rmSync(join(runDir(), 'worker.pid'), { force: true }); // as stopWorker does: the next test starts a new one
	return Date.now() - t0;
}

const logSince = (mark: number) => readFileSync(join(runDir(), 'worker.log'), 'utf8').slice(mark);
const logSize = () => readFileSync(join(runDir(), 'worker.log'), 'utf8').length;

describe('the worker on SIGTERM', () => {
	it('runs as one process: the PID file holds the worker itself, with no node process under it', async () => {
		const pid = workerPid() ?? (await startWorker());
		expect(readFileSync(`/proc/${pid}/cmdline`, 'utf8').split('\0')).toContain('scripts/worker.ts');
		const nodeChildren = childrenOf(pid).filter((c) => readFileSync(`/proc/${c}/cmdline`, 'utf8').split('\0')[0].endsWith('node'));
		expect(nodeChildren).toEqual([]);
	}, 120_000);

	it('idle: ends within 3 s by its own handler', async () => {
		const pid = workerPid() ?? (await startWorker());
		const mark = logSize();
		const took = await term(pid);
		console.log(`[worker-lifecycle] idle: gone ${took} ms after SIGTERM`);
		expect(took, `worker ${pid} still running ${BOUND_MS} ms after SIGTERM`).not.toBeNull();
		expect(logSince(mark)).toMatch(/\[worker\] stopped \(SIGTERM\) in \d+ ms/);
	}, 120_000);

	it('with Redis unreachable: still ends within 3 s', async () => {
		const pid = workerPid() ?? (await startWorker());
		await stopRedis();
		await sleep(1_000); // the worker's connections notice and start reconnecting
		const mark = logSize();
		const took = await term(pid);
		console.log(`[worker-lifecycle] Redis down: gone ${took} ms after SIGTERM`);
		try {
			expect(took, `worker ${pid} still running ${BOUND_MS} ms after SIGTERM with Redis down`).not.toBeNull();
			expect(logSince(mark)).toMatch(/\[worker\] stopped \(SIGTERM\) in \d+ ms/);
		} finally {
			if (running(pid)) process.kill(pid, 'SIGKILL'); // only the worker this test stopped
			await startRedis();
		}
	}, 120_000);
});

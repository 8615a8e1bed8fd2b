/**
 * The mail fake as scripts/lib/setup.sh starts it (start_mailfake, run here on ports and a data folder
 * of this file's own, so the suite's fake is left alone) is one process: mailfake.pid names the fake
 * itself, and a TERM to that PID ends it by its own handler within a bound and frees both ports.
 *
 * Before the fix it ran under the tsx command, a wrapper that relays a TERM to the node process it
 * starts and KILLs that process when it does not confirm within 30 ms: the PID file named the
 * wrapper, with the fake as a node process under it. Processes are signalled only by their PIDs.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { childrenOf, freePort, portClosed, runDir, running } from '../helpers/services';

const ROOT = resolve(import.meta.dirname, '../..');
const BOUND_MS = 3_000;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

const argv = (pid: number) => readFileSync(`/proc/${pid}/cmdline`, 'utf8').split('\0').filter(Boolean);
const isNode = (pid: number) => {
	try {
		return argv(pid)[0].endsWith('node');
	} catch {
		return false; // gone
	}
};

const dataDir = mkdtempSync(join(runDir(), 'mailfake-lifecycle-'));
const pidFile = join(dataDir, 'run', 'mailfake.pid');
const readPid = () => (existsSync(pidFile) ? Number(readFileSync(pidFile, 'utf8').trim()) : null);
const seen: number[] = [];

afterAll(async () => {
	// whatever a failed test left: only the PIDs of the fake this file started
	for (const pid of seen) if (running(pid)) process.kill(pid, 'SIGKILL');
	await sleep(200);
	rmSync(dataDir, { recursive: true, force: true });
});

describe('the mail fake as the scripts start it', () => {
	it('is one process: the PID file names the fake itself, and a TERM to it ends it by its own handler and frees its ports', async () => {
		const [smtpPort, httpPort] = [await freePort(), await freePort()];
		mkdirSync(join(dataDir, 'run'), { recursive: true, mode: 0o700 });
		const started = spawnSync('bash', ['-c', '. scripts/lib/env.sh && . scripts/lib/setup.sh && start_mailfake'], {
			cwd: ROOT,
			env: { ...process.env, CROSSTALLY_MODE: 'test', CROSSTALLY_DATA_DIR: dataDir, SMTP_PORT: String(smtpPort), MAILFAKE_PORT: String(httpPort) },
			stdio: ['ignore', 'pipe', 'pipe'],
			timeout: 90_000
		});
		const pid = readPid();
		if (pid) seen.push(pid, ...childrenOf(pid));
		expect(started.status, `start_mailfake: ${started.stderr}`).toBe(0);
		expect(pid).not.toBeNull();
		expect((await fetch(`http://127.0.0.1:${httpPort}/health`)).ok).toBe(true);

		// the PID file's process runs the fake's script, and no node process runs under it
		expect(argv(pid!)).toContain('scripts/mailfake.ts');
		expect(childrenOf(pid!).filter(isNode), `node processes under ${pid}: ${argv(pid!).join(' ')}`).toEqual([]);

		const t0 = Date.now();
		process.kill(pid!, 'SIGTERM');
		while (running(pid!) && Date.now() - t0 < BOUND_MS) await sleep(25);
		const took = Date.now() - t0;
		console.log(`[mailfake-lifecycle] gone ${took} ms after SIGTERM`);
		expect(running(pid!), `mail fake ${pid} still running ${BOUND_MS} ms after SIGTERM`).toBe(false);
		expect(readFileSync(join(dataDir, 'run', 'mailfake.log'), 'utf8')).toContain('mail fake stopped (SIGTERM)');
		expect(await portClosed(smtpPort)).toBe(true);
		expect(await portClosed(httpPort)).toBe(true);
	}, 120_000);
});

/**
 * Stopping and starting the services npm test started (Redis, the worker), by PID, for the
 * fault-injection tests. Reads RUN_DIR, REDIS_PORT and ENV_FILE (or CROSSTALLY_DATA_DIR) from the
 * environment scripts/test.sh exports. Processes started here write the same pid files as
 * scripts/lib/setup.sh, so the script's stop_all still stops them at the end of the run.
 */
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, openSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import net from 'node:net';
import { join, resolve } from 'node:path';

const ROOT = resolve(import.meta.dirname, '../..');

function env(name: string): string {
	const v = process.env[name];
	if (!v) throw new Error(`${name} is not set (run through npm test)`);
	return v;
}

export const runDir = () => env('RUN_DIR');
export const envFile = () => process.env.ENV_FILE ?? join(env('CROSSTALLY_DATA_DIR'), 'crosstally.env');
const redisPort = () => env('REDIS_PORT');

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

function readPid(file: string): number | null {
	try {
		const pid = Number(readFileSync(file, 'utf8').trim());
		return Number.isInteger(pid) && pid > 0 ? pid : null;
	} catch {
		return null;
	}
}

export function alive(pid: number | null): boolean {
	if (!pid) return false;
	try {
		process.kill(pid, 0);
		return true;
	} catch {
		return false;
	}
}

/** Running: in /proc and not a zombie (an orphan's zombie waits for init to reap it, which may take a while). */
export function running(pid: number): boolean {
	try {
		const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
		return stat.charAt(stat.lastIndexOf(')') + 2) !== 'Z';
	} catch {
		return false;
	}
}

/** Child processes of a PID (the tsx command runs a script in a child node process; serve.js forks copies). */
export function childrenOf(pid: number): number[] {
	const out: number[] = [];
	try {
		for (const tid of spawnSync('ls', [`/proc/${pid}/task`])
			.stdout.toString()
			.split(/\s+/)
			.filter(Boolean)) {
			const f = `/proc/${pid}/task/${tid}/children`;
			if (existsSync(f)) out.push(...readFileSync(f, 'utf8').split(/\s+/).filter(Boolean).map(Number));
		}
	} catch {
		/* gone */
	}
	return out;
}

function descendants(pid: number): number[] {
	const kids = childrenOf(pid);
	return kids.flatMap((k) => [k, ...descendants(k)]);
}

async function waitGone(pids: number[], timeoutMs: number): Promise<boolean> {
	const end = Date.now() + timeoutMs;
	while (pids.some(alive)) {
		if (Date.now() > end) return false;
		await sleep(50);
	}
	return true;
}

/** A loopback port nothing listens on now (the OS's choice), for a process a test starts on its own ports. */
export function freePort(): Promise<number> {
	return new Promise((res, rej) => {
		const s = net.createServer();
		s.once('error', rej);
		s.listen(0, '127.0.0.1', () => {
			const { port } = s.address() as net.AddressInfo;
			s.close(() => res(port));
		});
	});
}

/** Nothing listens on the port any more (a connection is refused). */
export function portClosed(port: number): Promise<boolean> {
	return new Promise((res) => {
		const c = net.connect(port, '127.0.0.1');
		c.once('connect', () => {
			c.destroy();
			res(false);
		});
		c.once('error', () => res(true));
	});
}

// ---------------------------------------------------------------------------------------------
// Redis

const redisPidFile = () => join(runDir(), 'redis.pid');

export function redisRunning(): boolean {
	return alive(readPid(redisPidFile()));
}

/** Stop Redis by its PID (SIGTERM; it keeps no data: --save '' --appendonly no). */
export async function stopRedis(): Promise<void> {
	const pid = readPid(redisPidFile());
	if (!alive(pid)) return;
	process.kill(pid!, 'SIGTERM');
	if (!(await waitGone([pid!], 10_000))) process.kill(pid!, 'SIGKILL');
	await waitGone([pid!], 5_000);
	rmSync(redisPidFile(), { force: true });
}

/** redis-cli with the generated password (REDISCLI_AUTH, as scripts/lib/setup.sh redis_cli). */
export function redisCli(...args: string[]) {
	return spawnSync('redis-cli', ['-h', '127.0.0.1', '-p', redisPort(), '--no-auth-warning', ...args], {
		env: { ...process.env, REDISCLI_AUTH: env('REDIS_PASSWORD') }
	});
}

/**
 * Start Redis with the command line of scripts/lib/setup.sh start_redis (its config file
 * $RUN_DIR/redis.conf holds requirepass), and wait for PONG.
 */
export async function startRedis(): Promise<void> {
	if (redisRunning()) return;
	const dir = join(runDir(), 'redis');
	mkdirSync(dir, { recursive: true });
	const conf = join(runDir(), 'redis.conf');
	if (!existsSync(conf)) writeFileSync(conf, `requirepass ${env('REDIS_PASSWORD')}\n`, { mode: 0o600 });
	const r = spawnSync('redis-server', [
		conf,
		'--port',
		redisPort(),
		'--bind',
		'127.0.0.1',
		'--save',
		'',
		'--appendonly',
		'no',
		'--dir',
		dir,
		'--pidfile',
		redisPidFile(),
		'--daemonize',
		'yes',
		'--maxmemory-policy',
		'noeviction',
		'--logfile',
		join(runDir(), 'redis.log')
	]);
	if (r.status !== 0) throw new Error(`redis-server did not start: ${r.stderr}`);
	const end = Date.now() + 10_000;
	for (;;) {
		const ping = redisCli('ping');
		if (ping.stdout?.toString().trim() === 'PONG') return;
		if (Date.now() > end) throw new Error('Redis did not answer');
		await sleep(100);
	}
}

// ---------------------------------------------------------------------------------------------
// The worker

const workerPidFile = () => join(runDir(), 'worker.pid');

export function workerPid(): number | null {
	const pid = readPid(workerPidFile());
	return alive(pid) ? pid : null;
}

export function workerRunning(): boolean {
	return workerPid() !== null;
}

/** Stop the worker gracefully (SIGTERM to the PID in worker.pid, the worker itself since it runs with --import tsx). */
export async function stopWorker(): Promise<void> {
	const pid = workerPid();
	if (!pid) return;
	const all = [pid, ...descendants(pid)];
	process.kill(pid, 'SIGTERM');
	if (!(await waitGone(all, 15_000))) for (const p of all) if (alive(p)) process.kill(p, 'SIGKILL');
	await waitGone(all, 5_000);
	rmSync(workerPidFile(), { force: true });
}

/**
 * Kill the worker the hard way: SIGKILL to the process in worker.pid and to any child of it (a worker
 * started under the tsx command before it ran with --import tsx had its script in a child process).
 */
export async function killWorker(): Promise<void> {
	const pid = workerPid();
	if (!pid) return;
	const all = [...descendants(pid), pid];
	for (const p of all) {
		try {
			process.kill(p, 'SIGKILL');
		} catch {
			/* already gone */
		}
	}
	await waitGone(all, 5_000);
	rmSync(workerPidFile(), { force: true });
}

/** The test process's environment without what vitest adds. */
export function workerEnv(): NodeJS.ProcessEnv {
	const e: NodeJS.ProcessEnv = {};
	for (const [k, v] of Object.entries(process.env)) if (!/^(VITEST|NODE_ENV$|TEST$)/.test(k)) e[k] = v;
	return e;
}

/**
 * Start a worker as scripts/lib/setup.sh does (`node --env-file=$ENV_FILE --import tsx
 * scripts/worker.ts`, output appended to $RUN_DIR/worker.log), with extra environment variables
 * (e.g. MAIL_TEST_PAUSE_AFTER_SEND_MS). Resolves once the worker logged that it started.
 */
export async function startWorker(extraEnv: Record<string, string> = {}): Promise<number> {
	const existing = workerPid();
	if (existing) return existing;
	const log = join(runDir(), 'worker.log');
	const marker = `--- worker started by tests at ${new Date().toISOString()} ---\n`;
	writeFileSync(log, marker, { flag: 'a' });
	const fd = openSync(log, 'a');
	const child = spawn(process.execPath, [`--env-file=${envFile()}`, '--import', 'tsx', 'scripts/worker.ts'], {
		cwd: ROOT,
		env: { ...workerEnv(), ...extraEnv },
		stdio: ['ignore', fd, fd],
		detached: true
	});
	child.unref();
	writeFileSync(workerPidFile(), `${child.pid}\n`);
	// generous: tsx compiles the worker on start, which takes long on a loaded machine
	const end = Date.now() + 90_000;
	for (;;) {
		const text = readFileSync(log, 'utf8');
		const since = text.slice(text.lastIndexOf(marker));
		if (/\[worker\] started/.test(since)) return child.pid!;
		if (!alive(child.pid!)) throw new Error(`worker exited at start:\n${since.slice(-2000)}`);
		if (Date.now() > end) throw new Error('worker did not start in 90 s');
		await sleep(100);
	}
}

/** Put Redis and one plain worker back as npm test started them (for afterEach). */
export async function restoreServices(): Promise<void> {
	await startRedis();
	if (!workerRunning()) await startWorker();
}

// ---------------------------------------------------------------------------------------------
// MariaDB

const mariadbPidFile = () => join(runDir(), 'mariadb.pid');
const mariadbSocket = () => join(runDir(), 'mariadb.sock');
const dbPort = () => env('DB_PORT');

export function mariadbPid(): number | null {
	const pid = readPid(mariadbPidFile());
	return alive(pid) ? pid : null;
}

function mariadbPing(): boolean {
	const r = spawnSync('mariadb-admin', ['--no-defaults', '--protocol=socket', `--socket=${mariadbSocket()}`, '-uroot', 'ping'], { stdio: 'ignore' });
	return r.status === 0;
}

/** Stop MariaDB by its PID (SIGTERM: a clean InnoDB shutdown) and wait until it is gone. */
export async function stopMariadb(): Promise<void> {
	const pid = mariadbPid();
	if (!pid) return;
	process.kill(pid, 'SIGTERM');
	if (!(await waitGone([pid], 60_000))) process.kill(pid, 'SIGKILL');
	await waitGone([pid], 5_000);
}

/**
 * Start MariaDB with the command line of scripts/lib/setup.sh start_mariadb (same data directory,
 * socket, pid file and port) and wait until it answers a ping.
 */
export async function startMariadb(): Promise<number> {
	const existing = mariadbPid();
	if (existing) return existing;
	const bin = existsSync('/usr/sbin/mariadbd') ? '/usr/sbin/mariadbd' : 'mariadbd';
	const tmp = join(runDir(), 'mariadb-tmp');
	mkdirSync(tmp, { recursive: true });
	const child = spawn(
		bin,
		[
			'--no-defaults',
			`--datadir=${join(env('CROSSTALLY_DATA_DIR'), 'mariadb')}`,
			`--socket=${mariadbSocket()}`,
			`--pid-file=${mariadbPidFile()}`,
			`--tmpdir=${tmp}`,
			`--log-error=${join(runDir(), 'mariadb.err')}`,
			`--port=${dbPort()}`,
			'--bind-address=127.0.0.1',
			'--skip-name-resolve',
			'--user=root',
			'--character-set-server=utf8mb4',
			'--collation-server=utf8mb4_unicode_ci',
			'--innodb-buffer-pool-size=256M',
			'--max-connections=300'
		],
		{ stdio: 'ignore', detached: true }
	);
	child.unref();
	const end = Date.now() + 60_000;
	for (;;) {
		if (mariadbPing()) return mariadbPid() ?? child.pid!;
		if (Date.now() > end) throw new Error('MariaDB did not start in 60 s');
		await sleep(200);
	}
}

/** Run SQL as MariaDB's root over the socket (for grants, counts and fault set-up). */
export async function rootQuery<T = Record<string, unknown>>(sql: string, values: unknown[] = [], database?: string): Promise<T[]> {
	const mariadb = await import('mariadb');
	const conn = await mariadb.createConnection({ socketPath: mariadbSocket(), user: 'root', database, bigIntAsNumber: true, decimalAsNumber: true });
	try {
		return (await conn.query(sql, values)) as T[];
	} finally {
		await conn.end();
	}
}

// ---------------------------------------------------------------------------------------------
// A second app instance (other settings, other port) for tests of time-outs and HTTPS cookies

/**
 * Start another app process from the same build as scripts/lib/setup.sh start_app does
 * (`node --env-file=$ENV_FILE $CROSSTALLY_BUILD_DIR/index.js`); variables in extraEnv win over the
 * env file. Output goes to $RUN_DIR/app-<port>.log. Resolves once /health answers.
 */
export async function startExtraApp(port: number, extraEnv: Record<string, string> = {}): Promise<{ pid: number; log: string; stop: () => Promise<void> }> {
	const log = join(runDir(), `app-${port}.log`);
	const fd = openSync(log, 'a');
	const build = process.env.CROSSTALLY_BUILD_DIR ?? 'build';
	const child = spawn(process.execPath, [`--env-file=${envFile()}`, join(build, 'index.js')], {
		cwd: ROOT,
		env: { ...workerEnv(), PORT: String(port), ...extraEnv },
		stdio: ['ignore', fd, fd],
		detached: true
	});
	child.unref();
	const pid = child.pid!;
	const stop = async () => {
		if (!alive(pid)) return;
		process.kill(pid, 'SIGTERM');
		if (!(await waitGone([pid], 10_000))) process.kill(pid, 'SIGKILL');
	};
	const end = Date.now() + 20_000;
	for (;;) {
		try {
			if ((await fetch(`http://127.0.0.1:${port}/health`)).ok) return { pid, log, stop };
		} catch {
			/* not yet */
		}
		if (!alive(pid)) throw new Error(`app on port ${port} exited at start:\n${readFileSync(log, 'utf8').slice(-2000)}`);
		if (Date.now() > end) {
			await stop();
			throw new Error(`app on port ${port} did not start in 20 s`);
		}
		await sleep(150);
	}
}

/**
 * The app's process: the adapter-node build, on every core.
 *
 * Node runs JavaScript on one thread, so one app process can use one core however many the machine
 * has; under load (`npm run test:load`) it was the bottleneck while the other core was partly idle.
 * With APP_PROCESSES=N (default 1; the bench uses 2) this primary forks N copies of the server; they
 * share the port (node:cluster hands each new connection to the next copy). Nothing is shared in
 * memory between requests: sessions are signed cookies, account state and sign-outs live in Redis
 * and everything else in MariaDB, the same reason several app servers can run behind a load balancer
 * (scripts/cluster).
 *
 * Stopping. The primary is the process of the PID file. On SIGTERM or SIGINT it sends SIGTERM to every
 * copy; each copy stops accepting, closes its idle keep-alive connections, lets its requests in flight
 * finish for up to SHUTDOWN_TIMEOUT seconds (default here 10; adapter-node's own default is 30) and then
 * cuts the rest (adapter-node's graceful shutdown), closes MariaDB and Redis (src/hooks.server.ts) and
 * exits. adapter-node never calls process.exit: it lets the event loop drain, and in a cluster copy the
 * IPC channel to the primary kept the loop alive for ever, so copies and primary outlived a TERM by hours.
 * A copy therefore unrefs its channel when told to stop. Bounds: a copy still running
 * SHUTDOWN_TIMEOUT + 3 s after the signal exits by itself (naming what kept it), and the primary KILLs
 * any copy left at SHUTDOWN_TIMEOUT + 5 s. The primary exits when every copy has.
 *
 * A copy that dies is started again (at most 5 times a minute), never once the primary is stopping.
 * If the primary itself is killed, each copy sees its IPC channel close ('disconnect') and exits at once
 * (node:cluster's own rule for a copy whose primary is gone), so no orphan keeps the port.
 *
 * Usage: node --env-file=<env> scripts/serve.js [build dir]   (default $CROSSTALLY_BUILD_DIR or build)
 */
import cluster from 'node:cluster';
import { resolve } from 'node:path';
import { pathToFileURL } from 'node:url';

const buildDir = resolve(process.argv[2] ?? process.env.CROSSTALLY_BUILD_DIR ?? 'build');
// One copy unless asked: with two copies a browser sign-in twice waited 45 s with neither a navigation
// nor an error (e2e, not yet explained), so more than one stays opt-in until that is understood.
const requested = Number(process.env.APP_PROCESSES || 1);
const copies = Number.isInteger(requested) && requested > 0 ? requested : 1;
// read by adapter-node (build/index.js) when imported below, and inherited by the copies
process.env.SHUTDOWN_TIMEOUT ||= '10';
const shutdownMs = (Number(process.env.SHUTDOWN_TIMEOUT) || 10) * 1000;

if (copies === 1) {
	// the plain server: no IPC channel, so adapter-node's graceful shutdown ends the process by itself
	await import(pathToFileURL(resolve(buildDir, 'index.js')).href);
} else if (!cluster.isPrimary) {
	// A copy. Installed before the build is imported: a signal that arrives while it loads is raised
	// again once adapter-node's own handler is there (otherwise this handler would have swallowed it).
	let stopSignal = null;
	const onStop = (signal) => {
		if (stopSignal) return;
		stopSignal = signal;
		// from now on only the server, its connections, MariaDB and Redis keep this copy alive
		process.channel?.unref();
		setTimeout(() => {
			// name what kept it alive
			const open = {};
			for (const r of process.getActiveResourcesInfo()) open[r] = (open[r] ?? 0) + 1;
			const list = Object.entries(open).map(([r, n]) => `${r} ×${n}`);
			console.error(`[serve] app process ${process.pid} still running ${shutdownMs / 1000 + 3} s after ${signal} (open: ${list.join(', ')}); exiting`);
			process.exit(1);
		}, shutdownMs + 3_000).unref();
	};
	process.on('SIGTERM', onStop);
	process.on('SIGINT', onStop);
	await import(pathToFileURL(resolve(buildDir, 'index.js')).href);
	if (stopSignal) process.kill(process.pid, stopSignal);
} else {
	let stopping = false;
	let failed = false; // a copy ended badly during the shutdown (killed, or exited by its own bound)
	const restarts = [];
	/** The copies by PID until their 'exit' (cluster.workers also drops a copy on 'disconnect'). */
	const running = new Map();
	const fork = () => {
		const w = cluster.fork();
		running.set(w.process.pid, w);
	};
	cluster.on('exit', (worker, code, signal) => {
		running.delete(worker.process.pid);
		if (stopping) {
			// (a copy still loading when the TERM came has no handler yet and simply ends by it)
			if (code !== 0 && signal !== 'SIGTERM') failed = true;
			if (running.size === 0) process.exit(failed ? 1 : 0);
			return;
		}
		const now = Date.now();
		while (restarts.length && now - restarts[0] > 60_000) restarts.shift();
		if (restarts.length >= 5) {
			console.error(`[serve] app process ${worker.process.pid} ended (${signal ?? code}); 5 restarts in a minute, giving up`);
			process.exit(1);
		}
		restarts.push(now);
		console.error(`[serve] app process ${worker.process.pid} ended (${signal ?? code}); starting another`);
		fork();
	});
	const stop = (signal) => {
		if (stopping) return;
		stopping = true;
		if (running.size === 0) process.exit(0);
		console.error(`[serve] ${signal}: stopping ${running.size} app processes (requests in flight get up to ${shutdownMs / 1000} s)`);
		for (const w of running.values()) w.process.kill('SIGTERM');
		setTimeout(() => {
			for (const [pid, w] of running) {
				console.error(`[serve] app process ${pid} still running ${shutdownMs / 1000 + 5} s after ${signal}; killing it`);
				w.process.kill('SIGKILL');
			}
		}, shutdownMs + 5_000).unref();
	};
	process.on('SIGTERM', () => stop('SIGTERM'));
	process.on('SIGINT', () => stop('SIGINT'));
	console.error(`[serve] ${copies} app processes (APP_PROCESSES) sharing port ${process.env.PORT ?? 3000}`);
	for (let i = 0; i < copies; i++) fork();
}

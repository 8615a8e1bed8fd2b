/**
 * Bounded retry of a whole database transaction.
 *
 * On a Galera cluster two nodes may run conflicting transactions at the same time; `FOR UPDATE`
 * locks only on the node that runs it, and the loser of the write-set certification at COMMIT gets
 * error 1213 (the same code as an InnoDB deadlock on a single server). Every transaction of the
 * services is therefore written to be safe to run again from the start: it rereads what it checks,
 * touches only the database inside the callback, and is all-or-nothing.
 *
 * Retried (the attempt was rolled back, nothing of it is kept):
 * - 1213 deadlock / certification conflict, in the body or at COMMIT;
 * - 1205 lock wait timeout (Sequelize rolls the whole transaction back, so a rerun is clean);
 * - 1047 "WSREP has not yet prepared node for application use" (a node that is joining);
 * - a connection lost or killed while the body ran (before COMMIT was sent): the server rolled it
 *   back; the pool hands out a fresh connection (through the local balancer, to a live node).
 * At COMMIT, 1047 and a lost connection leave the outcome unknown: db.ts `transaction()` then looks
 * up its commit marker and either returns (applied) or marks the error `notApplied` (retried here);
 * when even that cannot be learnt the error goes to the caller (503). Not retried: refused
 * connections and pool timeouts
 * (the database is down: retrying only adds waiting), and every other error.
 *
 * Backoff: full jitter, base TX_RETRY_BASE_MS (20 ms) doubling per attempt, capped at 1 s; after a
 * lost connection or a joining node, base 250 ms capped at 2 s (the balancer needs a moment);
 * at most TX_MAX_ATTEMPTS attempts (6). Each retry is counted (`txRetryStats`) and logged as one
 * `[tx] retry` line on stderr, which the cluster test counts across processes.
 */

export interface RetryStats {
	/** attempts run again after a retryable error */
	retries: number;
	/** transactions that still failed after the last attempt */
	gaveUp: number;
	/** retries by error code */
	byCode: Record<string, number>;
}

export const txRetryStats: RetryStats = { retries: 0, gaveUp: 0, byCode: {} };

const envNum = (name: string, fallback: number) => {
	const v = Number(process.env[name]);
	return Number.isFinite(v) && v > 0 ? v : fallback;
};

function errInfo(e: unknown): { errno: number; code: string; name: string } {
	const x = e as { errno?: number; code?: string; name?: string; original?: { errno?: number; code?: string }; parent?: { errno?: number; code?: string } };
	return {
		errno: Number(x?.original?.errno ?? x?.parent?.errno ?? x?.errno ?? 0),
		code: String(x?.original?.code ?? x?.parent?.code ?? x?.code ?? ''),
		name: String(x?.name ?? '')
	};
}

/** Deadlock, Galera certification conflict, lock wait timeout, node not ready: the transaction was rolled back. */
export function isRetryableConflict(e: unknown): boolean {
	const { errno, code } = errInfo(e);
	return errno === 1213 || errno === 1205 || errno === 1047 || code === 'ER_LOCK_DEADLOCK' || code === 'ER_LOCK_WAIT_TIMEOUT';
}

/** The connection went away under a running statement (server stopped, balancer moved it): rolled back. */
export function isLostConnection(e: unknown): boolean {
	const { errno, code } = errInfo(e);
	return (
		errno === 1053 || // server shutdown in progress
		errno === 1927 || // connection killed
		errno === 2013 ||
		/ER_SOCKET_UNEXPECTED_CLOSE|ECONNRESET|PROTOCOL_CONNECTION_LOST|ER_CONNECTION_KILLED|ER_SERVER_SHUTDOWN|EPIPE|ER_CMD_CONNECTION_CLOSED/.test(code)
	);
}

export interface RetryOptions {
	maxAttempts?: number;
	baseMs?: number;
	/** for tests and logs */
	label?: string;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/**
 * Run `attempt` until it succeeds, a non-retryable error is thrown, or the attempts are used up.
 * `attempt` receives the attempt number (0 first) and a `committing()` callback it calls once its
 * body is done and COMMIT is about to be sent: a lost connection after that is not retried.
 */
export async function withRetry<T>(attempt: (n: number, committing: () => void) => Promise<T>, opts: RetryOptions = {}): Promise<T> {
	const max = opts.maxAttempts ?? envNum('TX_MAX_ATTEMPTS', 6);
	const base = opts.baseMs ?? envNum('TX_RETRY_BASE_MS', 20);
	for (let n = 0; ; n++) {
		let atCommit = false;
		try {
			return await attempt(n, () => {
				atCommit = true;
			});
		} catch (e) {
			// at COMMIT only a certain rollback is retried: a conflict (1213/1205), or a commit whose
			// marker was looked up and not found (db.ts transaction() sets notApplied)
			const notApplied = (e as { notApplied?: boolean })?.notApplied === true;
			const certainConflict = isRetryableConflict(e) && !(atCommit && errInfo(e).errno === 1047);
			const retryable = certainConflict || notApplied || (!atCommit && isLostConnection(e));
			if (!retryable) throw e;
			if (n + 1 >= max) {
				txRetryStats.gaveUp++;
				console.error(`[tx] gave up after ${max} attempts${opts.label ? ` (${opts.label})` : ''}: ${errInfo(e).errno || errInfo(e).code}`);
				throw e;
			}
			const { errno, code } = errInfo(e);
			const key = errno ? String(errno) : code || 'lost';
			txRetryStats.retries++;
			txRetryStats.byCode[key] = (txRetryStats.byCode[key] ?? 0) + 1;
			// a lost connection or a joining node needs the balancer to move on (seconds), a write
			// conflict only the other transaction's commit (milliseconds)
			const slow = errno === 1047 || !isRetryableConflict(e);
			const delay = Math.random() * Math.min(slow ? 2000 : 1000, (slow ? Math.max(base, 250) : base) * 2 ** n);
			console.error(
				`[tx] retry ${n + 1}/${max - 1} after ${key}${atCommit ? ' at commit' : ''}${opts.label ? ` (${opts.label})` : ''}, waiting ${Math.round(delay)} ms`
			);
			await sleep(delay);
		}
	}
}

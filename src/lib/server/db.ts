/**
 * The database connection (Sequelize over the `mariadb` connector) and small query helpers.
 * Data-access modules under src/lib/server/ use `select`, `selectOne` and `exec` with named
 * replacements; multi-statement changes run inside `transaction`.
 */
import { Sequelize, QueryTypes, Transaction } from 'sequelize';
import * as mariadb from 'mariadb';
import { config } from './config';
import { randomUUID } from 'node:crypto';
import { performance } from 'node:perf_hooks';
import { withRetry, isRetryableConflict, type RetryOptions } from './tx';
import { writeMarker, markerCommitted } from './models/commit-marker';
import { sqlProfileEnabled, recordStatement } from './sql-profile';

let instance: Sequelize | null = null;

export function db(): Sequelize {
	if (!instance) {
		instance = new Sequelize(config.db.name, config.db.user, config.db.password, {
			host: config.db.host,
			port: config.db.port,
			dialect: 'mariadb',
			dialectModule: mariadb,
			// the benchmarks' per-statement timing (sql-profile.ts); off in the app
			...(sqlProfileEnabled() ? { benchmark: true, logging: (sql: string, ms?: number) => recordStatement(sql, ms) } : { logging: false }),
			timezone: '+00:00',
			pool: { max: config.db.pool, min: 0, idle: 10_000, acquire: 5_000 },
			dialectOptions: {
				connectTimeout: Number(process.env.DB_CONNECT_TIMEOUT_MS ?? 3_000),
				decimalAsNumber: true,
				bigIntAsNumber: true,
				dateStrings: ['DATE'],
				...(config.db.socket ? { socketPath: config.db.socket } : {}),
				// every transaction() is READ COMMITTED: set once per connection, not by a statement per transaction
				initSql: 'SET SESSION TRANSACTION ISOLATION LEVEL READ COMMITTED'
			}
		});
	}
	return instance;
}

export async function closeDb(): Promise<void> {
	if (instance) {
		const i = instance;
		instance = null;
		await i.close();
	}
}

export type Params = Record<string, unknown>;
export type Tx = Transaction | null | undefined;

export async function select<T = Record<string, unknown>>(sql: string, replacements: Params = {}, transaction?: Tx): Promise<T[]> {
	const run = () => db().query(sql, { type: QueryTypes.SELECT, replacements, transaction: transaction ?? undefined }) as Promise<T[]>;
	// inside a transaction the transaction's retry decides; a plain read is safe to run again
	return transaction ? run() : withRetry(() => run());
}

export async function selectOne<T = Record<string, unknown>>(sql: string, replacements: Params = {}, transaction?: Tx): Promise<T | null> {
	const rows = await select<T>(sql, replacements, transaction);
	return rows[0] ?? null;
}

/**
 * A read through the models outside a transaction, retried as `select` is (a read is safe to run
 * again). Inside a transaction pass the transaction to the model call instead: its retry decides.
 */
export const readRetried = <T>(run: () => Promise<T>): Promise<T> => withRetry(() => run());

/**
 * ONE model write outside a transaction (it commits as it runs), retried as `exec` is: on a deadlock
 * or Galera certification conflict (1213), a lock wait timeout (1205) or a joining node, never after a
 * lost connection (its outcome is unknown). Two or more writes that belong together go in
 * `transaction()` instead, never in two of these.
 */
export const autocommit = <T>(run: () => Promise<T>): Promise<T> =>
	withRetry((_n, committing) => {
		committing();
		return run();
	});

/**
 * INSERT/UPDATE/DELETE: returns the insert id and the number of affected rows. `replacements`: named
 * (`:name`) or, for a `Piped` statement run on its own, its `?` values in order.
 */
export async function exec(sql: string, replacements: Params | unknown[] = {}, transaction?: Tx): Promise<{ insertId: number; affected: number }> {
	const run = () => db().query(sql, { replacements, transaction: transaction ?? undefined, raw: true }) as Promise<unknown[]>;
	// A statement on its own commits as it runs: a deadlock or certification conflict (1213) means it
	// was not applied and is retried; a lost connection may have applied it and is not (committing()).
	const out = transaction
		? await run()
		: await withRetry((_n, committing) => {
				committing();
				return run();
			});
	// Sequelize answers INSERT with [insertId, affectedRows] and other statements with [OkPacket, …].
	if (typeof out[0] === 'number') return { insertId: Number(out[0]), affected: Number(out[1] ?? 0) };
	const packet = out[0] as { insertId?: number | bigint; affectedRows?: number } | undefined;
	return { insertId: Number(packet?.insertId ?? 0), affected: Number(packet?.affectedRows ?? 0) };
}

/** One statement of a `pipeline`: SQL with `?` placeholders and their values, in order. */
export interface Piped {
	sql: string;
	values?: unknown[];
}

/**
 * Guards for a write sent in a `pipeline` behind another statement. A statement that fails with a
 * deadlock or a Galera abort (1213) has rolled the whole transaction back, and the server still runs
 * what was sent behind it, each statement then on its own, committed as it runs; a guarded write does
 * nothing outside the transaction. UPDATE and DELETE: `… WHERE … AND ${IN_TX}` (no row matches). INSERT:
 * `VALUES (${GUARDED}, ?, …)` with the guard on a NOT NULL column — outside the transaction the value is
 * NULL and the statement fails (strict mode, MariaDB's default) without a row; not `INSERT … SELECT …
 * WHERE`, which on an AUTO_INCREMENT table takes the table's AUTO-INC lock for the whole statement
 * (innodb_autoinc_lock_mode 1) and, caught in a deadlock, answers 1467 instead of a retryable 1213.
 * Checked by hand on MariaDB 10.11: after a 1213, `@@in_transaction` is 0, a guarded write changes
 * nothing, an unguarded one commits.
 */
export const IN_TX = '@@in_transaction = 1';
/** The placeholder of a NOT NULL column in a guarded INSERT … VALUES (see IN_TX). */
export const GUARDED = `IF(${IN_TX}, ?, NULL)`;
/** `(?, IF(…, ?, NULL), ?)`: one row of a guarded INSERT … VALUES, the guard on `guard` (a NOT NULL column). */
export const guardedRow = (columns: readonly string[], guard: string) => `(${columns.map((c) => (c === guard ? GUARDED : '?')).join(', ')})`;

/**
 * Rows as guarded multi-row `INSERT INTO table (columns) VALUES …` statements of up to `chunk` rows
 * (`guardedRow`, the guard on `guard`); each row's values in the order of `columns`. `suffix`: e.g.
 * `ON DUPLICATE KEY UPDATE …` — an upsert keeps the guard (the NULL fails the statement before any key
 * is compared); never `INSERT IGNORE`, which turns the NULL into the column's implicit default ('' or
 * 0) and inserts the row.
 */
export function guardedInserts(table: string, columns: readonly string[], guard: string, rows: unknown[][], chunk = 500, suffix = ''): Piped[] {
	const out: Piped[] = [];
	for (let from = 0; from < rows.length; from += chunk) {
		const part = rows.slice(from, from + chunk);
		out.push({
			sql: `INSERT INTO ${table} (${columns.join(', ')}) VALUES ${part.map(() => guardedRow(columns, guard)).join(', ')}${suffix ? ` ${suffix}` : ''}`,
			values: part.flat()
		});
	}
	return out;
}

/**
 * A DATETIME(3) value as UTC text, for a `pipeline` statement: the driver called directly writes a
 * Date in the process's local time zone (Sequelize's replacements write it in the connection's +00:00).
 */
export const sqlTime = (d: Date) => d.toISOString().slice(0, 23).replace('T', ' ');

/**
 * Several statements sent at once on the transaction's connection, in the order given (the mariadb
 * driver pipelines them: one round trip for all), answered in that order: rows for a SELECT, the OK
 * packet (`affectedRows`, `insertId`) for a write. Raw SQL on the measured hot paths only (the
 * resolution and the second submit, issue 18): Sequelize sends a query only after its own awaits and
 * hooks, so statements started together through it may reach the server in any order, and a read
 * that must follow a lock (or a write) would not be sure to; here the driver is called directly, in
 * order, in one tick. Every statement runs even when one before it fails (the server does not skip
 * them), so: reads may follow anything; a write that follows another statement is guarded (`IN_TX`). The
 * first error is thrown once all have answered (the transaction then rolls back).
 */
export async function pipeline(t: Transaction, statements: Piped[]): Promise<unknown[]> {
	const conn = (t as unknown as { connection: { query: (sql: string, values?: unknown[]) => Promise<unknown> } }).connection;
	const profiled = sqlProfileEnabled();
	const sent = statements.map((s) => {
		const t0 = profiled ? performance.now() : 0;
		const p = conn.query(s.sql, s.values ?? []);
		return profiled ? p.finally(() => recordStatement(s.sql, performance.now() - t0)) : p;
	});
	const out = await Promise.allSettled(sent);
	const failed = out.find((r): r is PromiseRejectedResult => r.status === 'rejected');
	if (failed) throw failed.reason;
	return out.map((r) => (r as PromiseFulfilledResult<unknown>).value);
}

/** The commit marker of each running `transaction()` (see there), and whether the body has sent it. */
const markers = new WeakMap<Transaction, { id: string; sent: boolean }>();

/** What each running `transaction()` runs once its COMMIT has succeeded (`afterCommit`). */
const committedHooks = new WeakMap<Transaction, (() => void)[]>();

/**
 * Run `fn` once the change `t` belongs to has committed: never for an attempt that rolled back (a
 * conflict reruns the body on a new transaction, which registers its own), never inside the
 * transaction. Sequelize's own `t.afterCommit` is not used for `transaction()`: it runs its hooks in a
 * `finally`, after a failed COMMIT too. Without `t` (a statement that committed as it ran) `fn` runs now;
 * with a transaction not opened by `transaction()`, Sequelize's hook. `fn` must not throw or wait: a
 * side effect outside the database that may be lost (the mail wake-up, ./mail/wake.ts).
 */
export function afterCommit(t: Tx, fn: () => void): void {
	if (!t) return fn();
	const hooks = committedHooks.get(t);
	if (hooks) hooks.push(fn);
	else t.afterCommit(() => fn());
}

function runCommitted(hooks: (() => void)[]): void {
	for (const fn of hooks) {
		try {
			fn();
		} catch (e) {
			console.error(`[tx] an after-commit hook failed: ${e instanceof Error ? e.message : e}`);
		}
	}
}

/**
 * The transaction's commit marker as a guarded INSERT, for a hot path to send in its last `pipeline`
 * (one round trip less; the resolution): `transaction()` then does not write it again. The marker only
 * has to commit with the rest, which it does wherever it stands in the transaction; a body that throws
 * after sending it rolls it back with everything else.
 */
export function markerStatement(t: Transaction): Piped {
	const m = markers.get(t);
	if (!m) throw new Error('markerStatement: not inside transaction()');
	m.sent = true;
	return { sql: `INSERT INTO commit_markers (id) VALUES (${GUARDED})`, values: [m.id] };
}

/**
 * Every multi-statement change runs here: one READ COMMITTED transaction, run again from the start
 * (bounded, jittered backoff) when MariaDB or Galera answers a deadlock or write conflict (1213), a
 * lock wait timeout (1205), or a joining node (1047) — see ./tx.ts. The callback must therefore be
 * safe to rerun: reread what it checks and keep side effects outside the database after the commit.
 *
 * The last statement writes a commit marker. When COMMIT fails in a way that leaves its outcome
 * unknown (the connection or the node went away under it), the marker is looked up through another
 * connection: found, the change was applied and the caller gets its result; not found, it was not,
 * and the transaction is run again. So a node stopped mid-commit neither loses a change nor makes it
 * twice.
 */
export function transaction<T>(fn: (t: Transaction) => Promise<T>, retry?: RetryOptions): Promise<T> {
	return withRetry(async (_n, committing) => {
		const marker = randomUUID();
		let out: T | undefined;
		let bodyDone = false;
		const hooks: (() => void)[] = [];
		try {
			// READ COMMITTED: the session's level, set when the connection is made (initSql in db())
			const result = await db().transaction(async (t) => {
				const m = { id: marker, sent: false };
				markers.set(t, m);
				committedHooks.set(t, hooks);
				out = await fn(t);
				// unless the body sent it with its own last writes (markerStatement)
				if (!m.sent) await writeMarker(marker, t);
				bodyDone = true;
				committing();
				return out;
			});
			runCommitted(hooks); // COMMIT answered OK
			return result;
		} catch (e) {
			if (!bodyDone || isRetryableConflict(e)) throw e; // rolled back for certain
			// the outcome of COMMIT is unknown: ask the cluster (causal read, after a moment to settle)
			await new Promise((r) => setTimeout(r, 300));
			const applied = await withRetry(() => markerCommitted(marker), { maxAttempts: 4 }).catch(() => null);
			if (applied === true) {
				console.error('[tx] commit answer lost, the change was applied (commit marker found)');
				runCommitted(hooks);
				return out as T;
			}
			if (applied === false) throw Object.assign(e as object, { notApplied: true });
			throw e;
		}
	}, retry);
}

/**
 * Several reads that must agree with each other (a screen or an API answer built from more than one
 * query): one REPEATABLE READ transaction, so every read sees the same committed state even when a
 * change commits between them. Reads only (no commit marker); rerun whole on a conflict or a lost
 * connection, as `select` is.
 */
export function snapshot<T>(fn: (t: Transaction) => Promise<T>): Promise<T> {
	return withRetry(() => db().transaction({ isolationLevel: Transaction.ISOLATION_LEVELS.REPEATABLE_READ }, fn));
}

/** True when an error means the database cannot be reached (answered with 503, never a 500). */
/**
 * Every pooled connection stayed busy for the pool's whole acquire timeout: the server is reachable
 * but this app is overloaded. A subset of isDbUnavailable, answered with its own message (dbRefusal).
 */
export function isDbBusy(e: unknown): boolean {
	return (e as { name?: string })?.name === 'SequelizeConnectionAcquireTimeoutError';
}

/** What to tell a user whose request failed on isDbUnavailable, and when to try again (seconds). */
export function dbRefusal(e: unknown): { message: string; code: 'unavailable' | 'busy'; retryAfter: number } {
	return isDbBusy(e)
		? { message: 'Crosstally is too busy to take this request right now. Nothing was saved; try again in a few seconds.', code: 'busy', retryAfter: 5 }
		: { message: 'The database cannot be reached right now. Nothing was saved; try again in a minute.', code: 'unavailable', retryAfter: 60 };
}

export function isDbUnavailable(e: unknown): boolean {
	const name = (e as { name?: string })?.name ?? '';
	const code = e as { original?: { code?: string }; parent?: { code?: string }; code?: string };
	const c = code?.original?.code ?? code?.parent?.code ?? code?.code ?? '';
	const errno = Number((e as { original?: { errno?: number } })?.original?.errno ?? (e as { errno?: number })?.errno ?? 0);
	return (
		errno === 1047 || // a Galera node that is not synced (joining, or cut off from the cluster)
		errno === 1053 || // server shutdown in progress
		errno === 1927 || // connection killed by the server's shutdown
		name === 'SequelizeConnectionError' ||
		name === 'SequelizeConnectionRefusedError' ||
		name === 'SequelizeConnectionAcquireTimeoutError' ||
		name === 'SequelizeHostNotReachableError' ||
		name === 'SequelizeConnectionTimedOutError' ||
		/ECONNREFUSED|ER_GET_CONNECTION_TIMEOUT|ER_SOCKET_UNEXPECTED_CLOSE|ER_CONNECTION_TIMEOUT|ECONNRESET|PROTOCOL_CONNECTION_LOST/.test(c)
	);
}

function dbErrorCode(e: unknown): { errno: number | null; code: string } {
	const x = e as { original?: { errno?: number; code?: string }; parent?: { errno?: number; code?: string }; errno?: number; code?: string };
	const o = x?.original ?? x?.parent ?? x;
	return { errno: typeof o?.errno === 'number' ? o.errno : null, code: String(o?.code ?? '') };
}

/** A unique key refused the row (two requests inserting the same code or e-mail at once). */
export function isUniqueViolation(e: unknown): boolean {
	const { errno, code } = dbErrorCode(e);
	return (e as { name?: string })?.name === 'SequelizeUniqueConstraintError' || errno === 1062 || code === 'ER_DUP_ENTRY';
}

/** InnoDB chose this transaction as a deadlock victim (or gave up waiting for a lock). */
export function isLockConflict(e: unknown): boolean {
	const { errno, code } = dbErrorCode(e);
	return errno === 1213 || errno === 1205 || code === 'ER_LOCK_DEADLOCK' || code === 'ER_LOCK_WAIT_TIMEOUT';
}

/** A JSON column's value: the connector parses columns MariaDB reports as JSON, others are text. */
export function jsonValue<T = unknown>(v: unknown): T {
	if (v === null || v === undefined) return v as T;
	return (typeof v === 'string' ? JSON.parse(v) : v) as T;
}

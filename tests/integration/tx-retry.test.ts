/**
 * The transaction retry (src/lib/server/tx.ts) against a real deadlock on the real MariaDB: two
 * transactions lock the same two rows in opposite order, so InnoDB picks one as the victim and
 * answers it 1213 — the same error Galera gives the loser of a write conflict at COMMIT. With the
 * retry both transactions finish and the retry is counted; with one attempt only, one of them fails
 * with 1213 (so the first test's success is the retry's doing, not luck of timing).
 */
import { afterAll, describe, expect, it } from 'vitest';
import { literal } from 'sequelize';
import { autocommit, db, select, transaction, closeDb, exec } from '../../src/lib/server/db';
import { models } from '../../src/lib/server/models';
import { txRetryStats, withRetry, isRetryableConflict } from '../../src/lib/server/tx';

afterAll(async () => {
	await closeDb();
});

/** Resolves for everyone once `n` callers have arrived. */
function barrier(n: number) {
	let arrived = 0;
	let release!: () => void;
	const all = new Promise<void>((r) => (release = r));
	return async () => {
		if (++arrived >= n) release();
		await all;
	};
}

async function twoUsers(): Promise<[number, number]> {
	const rows = await select<{ id: number }>('SELECT id FROM users ORDER BY id LIMIT 2');
	expect(rows.length).toBe(2);
	return [rows[0].id, rows[1].id];
}

/** Transaction `name` locks `first`, waits until the other one holds its first row, then locks `second`. */
function crossing(attempts: Record<string, number>, meet: () => Promise<void>, maxAttempts?: number) {
	return (name: string, first: number, second: number) =>
		transaction(
			async (t) => {
				const n = attempts[name]++;
				await select('SELECT id FROM users WHERE id = :id FOR UPDATE', { id: first }, t);
				if (n === 0) await meet();
				await select('SELECT id FROM users WHERE id = :id FOR UPDATE', { id: second }, t);
				// a write, as the services do (a no-op value: the seeded accounts stay as they are)
				await exec('UPDATE users SET session_version = session_version + 0 WHERE id = :id', { id: first }, t);
				return name;
			},
			maxAttempts ? { maxAttempts } : undefined
		);
}

describe('transaction retry on a real deadlock (1213)', () => {
	it('both crossing transactions succeed; the victim ran twice and one retry is counted', async () => {
		const [a, b] = await twoUsers();
		const before = { retries: txRetryStats.retries, deadlocks: txRetryStats.byCode['1213'] ?? 0 };
		const attempts: Record<string, number> = { A: 0, B: 0 };
		const run = crossing(attempts, barrier(2));
		const out = await Promise.all([run('A', a, b), run('B', b, a)]);
		expect(out).toEqual(['A', 'B']);
		// two transactions, one deadlock victim run a second time: 3 attempts in all
		expect(attempts.A + attempts.B).toBe(3);
		expect(txRetryStats.retries - before.retries).toBe(1);
		expect((txRetryStats.byCode['1213'] ?? 0) - before.deadlocks).toBe(1);
	});

	it('with a single attempt the same crossing fails one of them with MariaDB error 1213', async () => {
		const [a, b] = await twoUsers();
		const attempts: Record<string, number> = { A: 0, B: 0 };
		const run = crossing(attempts, barrier(2), 1);
		const settled = await Promise.allSettled([run('A', a, b), run('B', b, a)]);
		const failed = settled.filter((s) => s.status === 'rejected') as PromiseRejectedResult[];
		expect(failed.length).toBe(1);
		expect(isRetryableConflict(failed[0].reason)).toBe(true);
		const errno = (failed[0].reason as { original?: { errno?: number } }).original?.errno;
		expect(errno).toBe(1213);
	});

	it('gives up after the bounded number of attempts and rethrows; other errors are not retried', async () => {
		let calls = 0;
		const deadlock = Object.assign(new Error('Deadlock found when trying to get lock'), { errno: 1213, code: 'ER_LOCK_DEADLOCK' });
		await expect(
			withRetry(
				async () => {
					calls++;
					throw deadlock;
				},
				{ maxAttempts: 4, baseMs: 1 }
			)
		).rejects.toBe(deadlock);
		expect(calls).toBe(4);
		calls = 0;
		const other = Object.assign(new Error('Duplicate entry'), { errno: 1062, code: 'ER_DUP_ENTRY' });
		await expect(
			withRetry(async () => {
				calls++;
				throw other;
			})
		).rejects.toBe(other);
		expect(calls).toBe(1);
	});

	it('a connection lost before COMMIT is retried, one lost during COMMIT is not (it may have been applied)', async () => {
		const lost = Object.assign(new Error('socket closed'), { code: 'ER_SOCKET_UNEXPECTED_CLOSE' });
		let calls = 0;
		const ok = await withRetry(
			async () => {
				if (calls++ === 0) throw lost;
				return 'done';
			},
			{ baseMs: 1 }
		);
		expect([ok, calls]).toEqual(['done', 2]);
		calls = 0;
		await expect(
			withRetry(
				async (_n, committing) => {
					calls++;
					committing();
					throw lost;
				},
				{ baseMs: 1 }
			)
		).rejects.toBe(lost);
		expect(calls).toBe(1);
	});
});

describe('one model write outside a transaction (db.ts autocommit)', () => {
	// A single UPDATE of two rows locks them in key order (low id, then high id). Transaction T holds
	// the high row and asks for the low one while the UPDATE waits for the high one: a real deadlock.
	// InnoDB rolls back the lighter side — the UPDATE, which has changed nothing, against T's 40
	// inserted rows — and answers it 1213. T is always rolled back, so nothing of it stays.
	async function crossingUpdate(update: () => Promise<unknown>): Promise<unknown> {
		const [lo, hi] = await twoUsers();
		const t = await db().transaction();
		try {
			await exec(`INSERT INTO commit_markers (id) VALUES ${Array.from({ length: 40 }, (_, i) => `('tx-test-${Date.now()}-${i}')`).join(',')}`, {}, t);
			await exec('UPDATE users SET session_version = session_version + 0 WHERE id = :id', { id: hi }, t);
			const waiting = update().then(
				(v) => ({ ok: v }),
				(e: unknown) => ({ error: e })
			);
			await new Promise((r) => setTimeout(r, 400)); // the UPDATE now holds `lo` and waits for `hi`
			await select('SELECT id FROM users WHERE id = :id FOR UPDATE', { id: lo }, t);
			await t.rollback();
			return await waiting;
		} catch (e) {
			await t.rollback().catch(() => {});
			throw e;
		}
	}
	const touchBoth = async () => {
		const [lo, hi] = await twoUsers();
		return models().User.update({ session_version: literal('session_version + 0') }, { where: { id: [lo, hi] } });
	};

	it('without the helper the crossing UPDATE is the deadlock victim (MariaDB error 1213)', async () => {
		const out = (await crossingUpdate(touchBoth)) as { error?: { original?: { errno?: number } } };
		expect(out.error?.original?.errno).toBe(1213);
	});

	it('through autocommit() the same UPDATE is run again after the deadlock and succeeds; one 1213 retry is counted', async () => {
		const before = txRetryStats.byCode['1213'] ?? 0;
		let calls = 0;
		const out = (await crossingUpdate(() =>
			autocommit(() => {
				calls++;
				return touchBoth();
			})
		)) as { ok?: unknown; error?: unknown };
		expect(out.error).toBeUndefined();
		// two rows matched (Sequelize answers [affected rows]; a no-op change still matches both)
		expect(Array.isArray(out.ok)).toBe(true);
		expect(calls).toBe(2);
		expect((txRetryStats.byCode['1213'] ?? 0) - before).toBe(1);
	});
});

describe('a COMMIT whose answer is lost (a database node stopped under it)', () => {
	// Sequelize's commit, wrapped so the connection "breaks" around it the way a stopped node breaks it
	async function withBrokenCommit<T>(mode: 'after' | 'instead', run: () => Promise<T>): Promise<T> {
		const proto = (await import('sequelize')).Transaction.prototype as unknown as { commit: () => Promise<void>; rollback: () => Promise<void> };
		const original = proto.commit;
		let broken = false;
		proto.commit = async function (this: { rollback: () => Promise<void> }) {
			if (broken) return original.call(this);
			broken = true;
			// 'after': the server applied it, the answer was lost; 'instead': it never got there
			if (mode === 'after') await original.call(this);
			else await this.rollback();
			throw Object.assign(new Error('socket has unexpectedly been closed'), { code: 'ER_SOCKET_UNEXPECTED_CLOSE', errno: 45009 });
		};
		try {
			return await run();
		} finally {
			proto.commit = original;
		}
	}

	async function countEvents(code: string) {
		const r = await select<{ n: number }>("SELECT COUNT(*) AS n FROM audit_events WHERE entity = 'tx_test' AND reason = :code", { code });
		return Number(r[0].n);
	}

	it('applied: the marker is found, the caller gets its result and the body is not run again', async () => {
		const code = `applied-${Date.now()}`;
		let runs = 0;
		const out = await withBrokenCommit('after', () =>
			transaction(async (t) => {
				runs++;
				await exec("INSERT INTO audit_events (entity, entity_id, action, reason) VALUES ('tx_test', 0, 'test', :code)", { code }, t);
				return 'result';
			})
		);
		expect(out).toBe('result');
		expect(runs).toBe(1);
		expect(await countEvents(code)).toBe(1);
	});

	it('not applied: no marker, the transaction runs again and the change is made once', async () => {
		const code = `rolled-${Date.now()}`;
		let runs = 0;
		const out = await withBrokenCommit('instead', () =>
			transaction(async (t) => {
				runs++;
				await exec("INSERT INTO audit_events (entity, entity_id, action, reason) VALUES ('tx_test', 0, 'test', :code)", { code }, t);
				return 'result';
			})
		);
		expect(out).toBe('result');
		expect(runs).toBe(2);
		expect(await countEvents(code)).toBe(1);
	});
});

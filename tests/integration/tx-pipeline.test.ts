/**
 * `pipeline()` (src/lib/server/db.ts) against a real deadlock on the real MariaDB. Statements sent
 * at once all run, even after one fails; when the one that fails is a deadlock victim (1213), the
 * transaction has been rolled back and what follows runs on its own, committed. The guard on a
 * write (`GUARDED`: a NOT NULL column's value is NULL outside a transaction) keeps such a write from
 * landing, and the pipeline answers with the 1213 (which transaction() retries), not with the
 * guard's own error. The unguarded INSERT beside it shows the danger the guard is for.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { randomUUID } from 'node:crypto';
import { closeDb, db, exec, GUARDED, guardedRow, pipeline, select } from '../../src/lib/server/db';
import { outboxInsert } from '../../src/lib/server/mail/outbox';
import { isRetryableConflict } from '../../src/lib/server/tx';

afterAll(async () => {
	await closeDb();
});

const markers = (ids: string[]) => select<{ id: string }>('SELECT id FROM commit_markers WHERE id IN (:ids)', { ids });

describe('pipeline: writes sent behind a deadlock victim', () => {
	it('a guarded INSERT behind the 1213 adds no row (an unguarded one commits); the pipeline answers 1213', async () => {
		const users = await select<{ id: number }>('SELECT id FROM users ORDER BY id LIMIT 2');
		expect(users.length).toBe(2);
		const [a, b] = users.map((u) => u.id);
		const guarded = randomUUID();
		const unguarded = randomUUID();
		// the heavier transaction: InnoDB rolls back the one with fewer rows locked or changed (the victim)
		const heavy = Array.from({ length: 20 }, () => randomUUID());
		let bothLocked!: () => void;
		const locked = new Promise<void>((r) => (bothLocked = r));
		let firstIn = false;
		const arrive = () => {
			if (firstIn) bothLocked();
			firstIn = true;
			return locked;
		};

		const victim = db().transaction(async (t) => {
			await select('SELECT id FROM users WHERE id = :a FOR UPDATE', { a }, t);
			await arrive();
			await pipeline(t, [
				{ sql: 'SELECT id FROM users WHERE id = ? FOR UPDATE', values: [b] },
				{ sql: `INSERT INTO commit_markers (id) VALUES ${guardedRow(['id'], 'id')}`, values: [guarded] },
				{ sql: 'INSERT INTO commit_markers (id) VALUES (?)', values: [unguarded] }
			]);
		});
		const other = db().transaction(async (t) => {
			for (const id of heavy) await exec('INSERT INTO commit_markers (id) VALUES (:id)', { id }, t);
			await select('SELECT id FROM users WHERE id = :b FOR UPDATE', { b }, t);
			await arrive();
			// let the victim's pipeline reach its wait on b first
			await new Promise((r) => setTimeout(r, 300));
			await select('SELECT id FROM users WHERE id = :a FOR UPDATE', { a }, t);
		});
		const [v, o] = await Promise.allSettled([victim, other]);
		try {
			expect(o.status).toBe('fulfilled');
			expect(v.status).toBe('rejected');
			const e = (v as PromiseRejectedResult).reason as { errno?: number };
			expect(e.errno).toBe(1213);
			expect(isRetryableConflict(e)).toBe(true);
			const found = (await markers([guarded, unguarded])).map((r) => r.id);
			expect(found).not.toContain(guarded);
			expect(found).toContain(unguarded);
		} finally {
			await exec('DELETE FROM commit_markers WHERE id IN (:ids)', { ids: [guarded, unguarded, ...heavy] });
		}
	});

	it('outside a transaction the guarded outbox upsert fails without a row; a guarded INSERT IGNORE would store the NULL as an empty string', async () => {
		// on its own (autocommit) @@in_transaction is 0: what a statement sent behind a deadlock victim sees
		const key = `tx-pipeline:${randomUUID()}`;
		const s = outboxInsert('invite', key, {});
		await expect(exec(s.sql, s.values)).rejects.toMatchObject({ original: { errno: 1048 } }); // ER_BAD_NULL_ERROR
		expect(await select('SELECT id FROM outbox WHERE idempotency_key = :key', { key })).toEqual([]);
		// why the outbox row is not INSERT IGNORE (shown on commit_markers, whose id is NOT NULL): IGNORE
		// turns the guard's NULL into the column's implicit default and inserts the row
		await exec(`DELETE FROM commit_markers WHERE id = ''`);
		try {
			const ignored = await exec(`INSERT IGNORE INTO commit_markers (id) VALUES (${GUARDED})`, [randomUUID()]);
			expect(ignored.affected).toBe(1);
			expect(await markers([''])).toEqual([{ id: '' }]);
		} finally {
			await exec(`DELETE FROM commit_markers WHERE id = ''`);
		}
	});

	it('inside the transaction the guarded INSERT lands, in the order sent', async () => {
		const id = randomUUID();
		const out = await db().transaction((t) =>
			pipeline(t, [
				{ sql: `INSERT INTO commit_markers (id) VALUES ${guardedRow(['id'], 'id')}`, values: [id] },
				{ sql: 'SELECT COUNT(*) AS n FROM commit_markers WHERE id = ?', values: [id] }
			])
		);
		try {
			expect((out[0] as { affectedRows: number }).affectedRows).toBe(1);
			expect(Number((out[1] as Array<{ n: number }>)[0].n)).toBe(1);
		} finally {
			await exec('DELETE FROM commit_markers WHERE id = :id', { id });
		}
	});
});

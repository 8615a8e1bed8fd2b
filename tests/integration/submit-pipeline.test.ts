/**
 * The second submit's one write batch (`submitSecond`, protocols/passes.ts: the protocol's
 * compare-and-set, the discrepancies, the trail, the audit's rows and `_delta` appends, the outbox row,
 * the commit marker, sent in one `pipeline`) against a real deadlock on the real MariaDB. The batch's
 * second statement, the discrepancies' INSERT, waits for another transaction that asks for the protocol
 * row the submit holds: InnoDB rolls the submit back (1213) and the server runs every statement sent
 * behind it on its own, committed as it runs. Each of them is guarded (`IN_TX`, db.ts), so none may
 * leave a row. The round was recorded before (rows of an earlier recording), so the batch also holds
 * the negated appends and the DELETEs of a re-recording, and every statement has committed rows to
 * read or delete: a statement without its guard would leave a trace here (a delta row of this test's
 * own battery, a deleted or added audit row, an outbox row, a trail event). Then the same submit,
 * undisturbed, writes all of them.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Transaction } from 'sequelize';
import { randomUUID } from 'node:crypto';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, getPass, saveAndSubmit, userId, type Scores } from '../helpers/workflow';
import { makeBattery } from '../helpers/verification';
import { closeDb, db, exec, select, selectOne } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { submitPass } from '../../src/lib/server/protocols/passes';

let lead: Client, s1: Client, s2: Client;
beforeAll(async () => {
	[lead, s1, s2] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

// the brief-screen battery's five tests, each raw score in its norm group's range
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
// every table the batch appends to, and the summaries the worker's fold moves their rows into
const SUMS = ['audit_daily', 'agreement_daily', 'agreement_weekly', 'agreement_pair_daily', 'agreement_values'];
const SUM_TABLES = SUMS.flatMap((s) => [`${s}_delta`, s]);

async function sumRows(batteryId: number): Promise<Record<string, number>> {
	const out: Record<string, number> = {};
	for (const table of SUM_TABLES)
		out[table] = Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM ${table} WHERE battery_id = :batteryId`, { batteryId }))!.n);
	return out;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('the second submit batch behind a deadlock victim', () => {
	it('leaves no row of any of its writes when its transaction is rolled back mid-batch; undisturbed, it writes them all', async () => {
		const battery = await makeBattery();
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, battery: battery.code });
		const first = await correctScores(id, RAWS);
		const second: Scores = JSON.parse(JSON.stringify(first));
		second['word-recall'].raw = '30'; // one raw slip: at least one discrepancy, so the batch has its INSERT
		expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
		const seen = await getPass(s2, id);
		const put = await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores: second, draftVersion: seen.body.draftVersion } });
		expect(put.status).toBe(200);
		const { draftVersion } = await put.json();
		const [firstId, secondId] = await Promise.all([userId(ACCOUNTS.scorer), userId(ACCOUNTS.scorer2)]);
		const actor = { id: secondId, name: 'Rae', roles: ['scorer' as const] };

		// rows of an earlier recording of round 1 (committed; no sums appended for them): the submit
		// re-records the round, so its batch negates their sums and deletes them before writing its own
		await exec(
			`INSERT INTO audit_fields (pass_id, test_code, protocol_id, round, which, scorer_id, battery_id, domain, fields_entered, raw_fields, derived_fields, entered_at)
			 VALUES (:pass, 'zz-earlier', :id, 1, 'first', :firstId, :b, 'zz', 3, 1, 2, CURRENT_TIMESTAMP(3))`,
			// a pass id of no pass, one per protocol
			{ pass: 3_900_000_000 + id, id, firstId, b: battery.id }
		);
		await exec(
			`INSERT INTO agreement_pairs (protocol_id, round, battery_id, test_code, domain, field, first_scorer_id, second_scorer_id, first_value, second_value, entered_at)
			 VALUES (:id, 1, :b, 'zz-earlier', 'zz', 'raw', :firstId, :secondId, 10, 12, CURRENT_TIMESTAMP(3))`,
			{ id, b: battery.id, firstId, secondId }
		);
		const auditRows = () => select<{ test_code: string }>('SELECT test_code FROM audit_fields WHERE protocol_id = :id ORDER BY pass_id, test_code', { id });
		const pairRows = () => select<{ test_code: string }>('SELECT test_code FROM agreement_pairs WHERE protocol_id = :id', { id });
		const outboxRows = () => select<{ kind: string }>(`SELECT kind FROM outbox WHERE JSON_VALUE(payload, '$.protocolId') = :id`, { id: String(id) });
		const noSums = Object.fromEntries(SUM_TABLES.map((t) => [t, 0]));
		expect(await sumRows(battery.id)).toEqual(noSums);

		// The other transaction, heavier (InnoDB rolls back the one with fewer rows changed): it holds
		// the key of the submit's first discrepancy (protocol, round 1, position 1), uncommitted, without
		// the foreign key's shared lock on the protocol row (the submit must be able to lock that row first).
		const other: Transaction = await db().transaction();
		let released = false;
		const release = async () => {
			if (released) return;
			released = true;
			await exec('SET SESSION foreign_key_checks = 1', {}, other);
			await other.rollback();
		};
		const heavy = Array.from({ length: 40 }, () => randomUUID());
		const previousAttempts = process.env.TX_MAX_ATTEMPTS;
		try {
			for (const m of heavy) await exec('INSERT INTO commit_markers (id) VALUES (:m)', { m }, other);
			await exec('SET SESSION foreign_key_checks = 0', {}, other);
			await exec(
				`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other) VALUES (:id, 1, 1, 'word-recall', 'raw', 'both', 'transposition', '1', '2')`,
				{ id },
				other
			);
			// one attempt: transaction() would otherwise run the submit again once the deadlock is over
			process.env.TX_MAX_ATTEMPTS = '1';
			const submit = submitPass(id, actor, { draftVersion }).then(
				(r) => ({ ok: true as const, r }),
				(e: { errno?: number }) => ({ ok: false as const, errno: e?.errno })
			);
			// wait until the submit holds the protocol row (its first statement; a locked row is skipped, in
			// autocommit): from then on, whichever comes first, the submit's batch waits at its discrepancies'
			// INSERT for the other transaction and the other transaction waits for the protocol row — a cycle
			let locked = false;
			for (let i = 0; i < 400 && !locked; i++) {
				locked = (await select('SELECT id FROM protocols WHERE id = :id FOR UPDATE SKIP LOCKED', { id })).length === 0;
				if (!locked) await sleep(10);
			}
			expect(locked, 'the submit never locked the protocol row').toBe(true);
			// the cycle: the other transaction asks for the protocol row the submit holds
			await select('SELECT id FROM protocols WHERE id = :id FOR UPDATE', { id }, other);
			const out = await submit;
			expect(out).toEqual({ ok: false, errno: 1213 });
		} finally {
			if (previousAttempts === undefined) delete process.env.TX_MAX_ATTEMPTS;
			else process.env.TX_MAX_ATTEMPTS = previousAttempts;
			await release();
			await exec('DELETE FROM commit_markers WHERE id IN (:heavy)', { heavy });
		}

		// Nothing of the submit is left: the protocol and the pass as they were, and not one row of a
		// statement sent behind the victim — each would have committed on its own without its guard.
		expect(await selectOne('SELECT status FROM protocols WHERE id = :id', { id })).toEqual({ status: 'awaiting_second' });
		expect(await selectOne(`SELECT status FROM passes WHERE protocol_id = :id AND which = 'second'`, { id })).toEqual({ status: 'draft' });
		expect(await select('SELECT id FROM discrepancies WHERE protocol_id = :id', { id })).toEqual([]);
		expect(await select(`SELECT action FROM audit_events WHERE protocol_id = :id AND action IN ('submit_second', 'reconcile')`, { id })).toEqual([]);
		// the earlier recording's rows neither deleted nor joined by the submit's own
		expect(await auditRows()).toEqual([{ test_code: 'zz-earlier' }]);
		expect(await pairRows()).toEqual([{ test_code: 'zz-earlier' }]);
		// no append (negated or not) for this test's own battery, in a delta table or folded into its summary
		expect(await sumRows(battery.id)).toEqual(noSums);
		expect(await outboxRows()).toEqual([]);

		// The same submit, undisturbed: every one of those writes lands, in its transaction.
		const done = await submitPass(id, actor, { draftVersion });
		expect(done.status).toBe('in_review');
		// each pass: its whole-pass row ('') and one per test entered (five tests): 2 × (1 + 5)
		const audit = await auditRows();
		expect(audit.length).toBe(12);
		expect(audit.map((r) => r.test_code)).not.toContain('zz-earlier');
		expect((await pairRows()).map((r) => r.test_code)).not.toContain('zz-earlier');
		expect((await pairRows()).length).toBeGreaterThan(0);
		const sums = await sumRows(battery.id);
		for (const s of SUMS) expect(sums[`${s}_delta`] + sums[s], s).toBeGreaterThan(0);
		expect(await outboxRows()).toEqual([{ kind: 'review_first' }]);
		expect((await select('SELECT id FROM discrepancies WHERE protocol_id = :id', { id })).length).toBeGreaterThan(0);
	});
});

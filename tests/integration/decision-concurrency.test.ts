/**
 * Decisions of one protocol at the same moment (issue 18). A decision locks its own discrepancy row
 * and takes the protocol row only at its end, to move the protocol's lock_version (a raw decision
 * takes it at its start): decisions of different discrepancies of one protocol no longer wait for
 * each other's whole transaction, and still serialize with sign-off. Against the running app and the
 * real MariaDB; every expected figure is counted by hand below.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, type Scores } from '../helpers/workflow';
import { select, selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

let lead: Client, s1: Client, s2: Client, reviewer: Client;
beforeAll(async () => {
	[lead, s1, s2, reviewer] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('reviewer')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
// the brief-screen battery's five tests, each raw score in its norm group's range
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };

type Row = { id: number; test_code: string; field: string; lock_version: number };
const protocolLock = async (id: number) =>
	(await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
const patch = (d: Pick<Row, 'id'>, json: Record<string, unknown>) => reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json });

/**
 * A protocol in review whose second pass mistyped one derived score (plus one) in each of the first
 * `derived` tests, and with `rawSlip` the raw score of the last test (plus one, its derived scores
 * copied from the first pass): `derived` derived discrepancies in as many tests, each waiting on nothing.
 */
async function inReview(derived: number, rawSlip = false): Promise<{ id: number; rows: Row[] }> {
	const id = await createViaForm(lead, duties);
	const first = await correctScores(id, RAWS);
	const second: Scores = JSON.parse(JSON.stringify(first));
	const codes = Object.keys(second);
	for (const code of codes.slice(0, derived)) {
		const field = (['standard', 't', 'scaled'] as const).find((f) => second[code][f] != null)!;
		second[code][field] = String(Number(second[code][field]) + 1);
	}
	if (rawSlip) {
		const last = codes[codes.length - 1];
		second[last].raw = String(Number(second[last].raw) + 1);
	}
	expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
	expect((await saveAndSubmit(s2, id, second)).status).toBe(200);
	const rows = await select<Row>('SELECT id, test_code, field, lock_version FROM discrepancies WHERE protocol_id = :id AND round = 1 ORDER BY position', {
		id
	});
	return { id, rows };
}

describe('decisions of one protocol at the same moment', () => {
	it('four decisions of four discrepancies sent at once all land; the protocol version moves once for each', async () => {
		const { id, rows } = await inReview(4);
		// one derived discrepancy in each of the four slipped tests, nothing else
		expect(rows.map((r) => r.field === 'raw')).toEqual([false, false, false, false]);
		expect(new Set(rows.map((r) => r.test_code)).size).toBe(4);
		const before = await protocolLock(id);
		const res = await Promise.all(rows.map((d) => patch(d, { choice: 'recomputed', lockVersion: d.lock_version })));
		expect(res.map((r) => r.status)).toEqual([200, 200, 200, 200]);
		// each decision moved the protocol's version by one: 4 in all, none lost to another
		expect(await protocolLock(id)).toBe(before + 4);
		const now = await select<{ resolution: string; lock_version: number }>(
			'SELECT resolution, lock_version FROM discrepancies WHERE protocol_id = :id ORDER BY position',
			{ id }
		);
		expect(now).toEqual(rows.map((r) => ({ resolution: 'recomputed', lock_version: r.lock_version + 1 })));
		const events = await select<{ action: string }>("SELECT action FROM audit_events WHERE protocol_id = :id AND entity = 'discrepancy'", { id });
		expect(events.map((e) => e.action)).toEqual(['resolve', 'resolve', 'resolve', 'resolve']);
		// and the protocol can be signed off with the version they left
		expect((await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: before + 4 } })).status).toBe(200);
	});

	it('a raw decision (which locks the protocol first) and three derived decisions of other tests, at once: all land', async () => {
		const { id, rows } = await inReview(3, true);
		const raw = rows.filter((r) => r.field === 'raw');
		const derivedOfOthers = rows.filter((r) => r.field !== 'raw' && r.test_code !== raw[0]?.test_code);
		expect(raw.length).toBe(1);
		expect(derivedOfOthers.length).toBe(3);
		const before = await protocolLock(id);
		const res = await Promise.all([
			patch(raw[0], { choice: 'first', lockVersion: raw[0].lock_version }),
			...derivedOfOthers.map((d) => patch(d, { choice: 'recomputed', lockVersion: d.lock_version }))
		]);
		expect(res.map((r) => r.status)).toEqual([200, 200, 200, 200]);
		expect(await protocolLock(id)).toBe(before + 4);
		const decided = await select<{ id: number; resolution: string | null }>('SELECT id, resolution FROM discrepancies WHERE id IN (:ids) ORDER BY id', {
			ids: [raw[0].id, ...derivedOfOthers.map((d) => d.id)]
		});
		expect(decided.map((d) => d.resolution).sort()).toEqual(['first', 'recomputed', 'recomputed', 'recomputed']);
	});

	it('20 races of four changed decisions against a sign-off: either the sign-off wins and every change is refused, or it is refused as stale', async () => {
		const wins = { signOff: 0, changes: 0 };
		for (let i = 0; i < 20; i++) {
			const { id, rows } = await inReview(4);
			for (const d of rows) expect((await patch(d, { choice: 'recomputed', lockVersion: d.lock_version })).status).toBe(200);
			const seen = await protocolLock(id); // the version of the reviewer's view: every row decided
			// The reviewer changes all four (the first pass's value equals the recomputed one: no note)
			// while the sign-off of the view they had is on its way.
			// The sign-off leaves 0–32 ms after the changes, so that either may come first.
			const sent = rows.map((d) => patch(d, { choice: 'first', lockVersion: d.lock_version + 1 }));
			await new Promise((r) => setTimeout(r, (i % 5) * 8));
			const sign = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: seen } });
			const changes = await Promise.all(sent);
			const statuses = changes.map((c) => c.status);
			const p = (await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id }))!;
			const resolutions = (await select<{ resolution: string }>('SELECT resolution FROM discrepancies WHERE protocol_id = :id ORDER BY position', { id })).map(
				(d) => d.resolution
			);
			const events = await select<{ action: string }>(
				"SELECT action FROM audit_events WHERE protocol_id = :id AND action IN ('resolve', 'change_resolution', 'sign_off') ORDER BY id",
				{ id }
			);
			const label = `race ${i}: sign-off ${sign.status}, changes ${statuses.join(' ')}`;
			if (sign.status === 200) {
				// no change landed before the sign-off (it would have moved the version), none after it
				wins.signOff++;
				expect(statuses, label).toEqual([409, 409, 409, 409]);
				expect(p.status).toBe('verified');
				expect(resolutions).toEqual(['recomputed', 'recomputed', 'recomputed', 'recomputed']);
				expect(events.map((e) => e.action)).toEqual(['resolve', 'resolve', 'resolve', 'resolve', 'sign_off']);
			} else {
				// a change committed before the sign-off read the protocol: the sign-off is stale, and with
				// the sign-off refused nothing stops the other changes
				wins.changes++;
				expect(sign.status, label).toBe(409);
				expect((await sign.json()).message).toMatch(/changed since you opened it/);
				expect(statuses, label).toEqual([200, 200, 200, 200]);
				expect(p.status).toBe('in_review');
				expect(resolutions).toEqual(['first', 'first', 'first', 'first']);
				expect(
					events
						.map((e) => e.action)
						.slice(4)
						.sort()
				).toEqual(['change_resolution', 'change_resolution', 'change_resolution', 'change_resolution']);
			}
		}
		console.log(`[race] sign-off won ${wins.signOff}, the changes won ${wins.changes} of 20`);
		expect(wins.signOff + wins.changes).toBe(20);
	}, 300_000);
});

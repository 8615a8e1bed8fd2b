/**
 * Review that follows the evidence (issue 13), against the running app and the real MariaDB:
 * the raw decision re-judges its test's derived discrepancies in its own transaction, the audit
 * charges, sign-off confirmation of values kept against the recomputation, and amendments.
 *
 * Test `word-harvest` (invented demo norms, db/seeds/catalog.ts), higher is better, raw 0–80,
 * reports z, T and percentile; the examinee is 38 years old with 12 years of education, so the
 * group is ages 30;0–39;11, up to 12 years of education: mean 19.5, SD 4.6. Worked by hand:
 *   raw 24: z = (24 − 19.5)/4.6 = 4.5/4.6 = 0.97826 → z 0.98; T = 50 + 9.7826 = 59.78 → 60;
 *           percentile = 100·Φ(0.97826) ≈ 83.6 → 84 (Φ(0.97) = .8340, Φ(0.98) = .8365, normal table)
 *   raw 42: z = 22.5/4.6 = 4.8913 → 4.89; T = 98.9 → clamped to 80; percentile ≈ 99.99995 → 99 (clamp)
 *   raw 25: z = 5.5/4.6 = 1.19565 → 1.20; T = 61.96 → 62; percentile ≈ 88.4 → 88 (Φ(1.19) = .8830, Φ(1.20) = .8849)
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { Client, signedIn, ACCOUNTS, caughtMail, waitFor } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, type Scores } from '../helpers/workflow';
import Papa from 'papaparse';
import { tidewaterProtocol, tidewaterCarriedSlip } from '../helpers/tidewater';
import { select, selectOne, exec, closeDb, jsonValue } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

let lead: Client, s1: Client, s2: Client, reviewer: Client;
beforeAll(async () => {
	[lead, s1, s2, reviewer] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('reviewer')]);
});
const made: number[] = [];
afterAll(async () => {
	// end the reminder chains of what is still in review here (npm test's interval is a day; a run with a short one set stays quiet too), so they do not
	// flood the mail fake for the test files that run after this one
	if (made.length)
		await exec(`UPDATE protocols SET status = 'verified', verified_at = CURRENT_TIMESTAMP(3) WHERE id IN (:ids) AND status = 'in_review'`, { ids: made });
	await closeRedis();
	await closeDb();
});

const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, educationYears: 12 };
const RIGHT_24 = { raw: '24', z: '0.98', t: '60', percentile: '84' };

interface Row {
	id: number;
	field: string;
	pass: string;
	kind: string;
	value: string | null;
	other: string | null;
	expected: string | null;
	alternative: string | null;
	resolution: string | null;
	resolved_value: string | null;
	resolved_by: number | null;
	settled_by: string | null;
	lock_version: number;
}

const rows = (id: number, test = 'word-harvest') =>
	select<Row>(
		`SELECT d.id, d.field, d.pass, d.kind, d.value, d.other, d.expected, d.alternative, d.resolution, d.resolved_value, d.resolved_by, d.settled_by, d.lock_version
		   FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id AND p.round = d.round WHERE d.protocol_id = :id AND d.test_code = :test ORDER BY d.position`,
		{ id, test }
	);

/**
 * The raw-42 protocol: both passes right everywhere except that the second scorer typed raw 42 for
 * 24 on word-harvest while looking up the derived scores for 24. Other tests: both passes the same
 * right entry (setup only; no assertion rests on those values).
 */
async function raw42(extra: (first: Scores, second: Scores) => void = () => {}): Promise<number> {
	const id = await createViaForm(lead, duties);
	made.push(id);
	const first = await correctScores(id, { 'word-harvest': 24, 'switch-rule': 5 });
	first['word-harvest'] = { ...RIGHT_24 };
	const second: Scores = JSON.parse(JSON.stringify(first));
	second['word-harvest'].raw = '42';
	extra(first, second);
	expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
	const r = await saveAndSubmit(s2, id, second);
	expect(r.status, JSON.stringify(r.body)).toBe(200);
	return id;
}

async function resolve(id: number, body: Record<string, unknown>) {
	const d = await selectOne<{ lock_version: number }>('SELECT lock_version FROM discrepancies WHERE id = :id', { id });
	const res = await reviewer.request(`/api/v1/discrepancies/${id}`, { method: 'PATCH', json: { lockVersion: d!.lock_version, ...body } });
	return { status: res.status, body: await res.json() };
}

/** raw, z, standard, scaled, t, percentile of one test's row of the summary CSV (…, test, group, raw, z, standard, scaled, t, percentile, …). */
function scoresIn(csv: string, test: string): string[] {
	const rows = Papa.parse<string[]>(csv.replace(/^\ufeff/, '').trim(), { skipEmptyLines: true, delimiter: ',' }).data;
	const row = rows.find((r) => r.includes(test));
	if (!row) throw new Error(`no row for ${test} in ${JSON.stringify(rows)}`);
	const i = row.indexOf(test);
	return row.slice(i + 2, i + 8);
}

const userIdOf = async (email: string) => (await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :e', { e: email }))!.id;

describe('the raw decision settles its derived scores', () => {
	it('one raw card; the derived cards are right for the other raw score and wait on it', async () => {
		const id = await raw42();
		const all = await select<{ test_code: string }>('SELECT test_code FROM discrepancies WHERE protocol_id = :id', { id });
		expect(
			all.every((d) => d.test_code === 'word-harvest'),
			JSON.stringify(all)
		).toBe(true);
		const list = await rows(id);
		// raw: 24 vs 42, the two digits swapped; derived: the second pass's values fit raw 24 (rule 5)
		expect(list.map((d) => [d.field, d.pass, d.kind, d.value, d.expected, d.alternative])).toEqual([
			['raw', 'both', 'transposition', '24', null, null],
			['z', 'second', 'follows_other_raw', '0.98', '4.89', '0.98'],
			['t', 'second', 'follows_other_raw', '60', '80', '60'],
			['percentile', 'second', 'follows_other_raw', '84', '99', '84']
		]);
		// a derived card cannot be decided before the raw score
		const early = await resolve(list[1].id, { choice: 'second' });
		expect(early.status).toBe(409);
		expect(early.body.code).toBe('waits_on_raw');
		// the Review page says so, and names the likely slip
		const html = await (await reviewer.get(`/protocols/${id}/review`)).text();
		expect(html).toContain('waits on the raw score');
		expect(html).toContain('fits the first pass’s raw score 24 — the raw 42 is likely a typing slip');
	});

	it('settling raw 24 closes the three derived cards in the same transaction, recorded with who and when; the second scorer is charged one raw error only', async () => {
		const id = await raw42();
		const list = await rows(id);
		const r = await resolve(list[0].id, { choice: 'first' });
		expect(r.status, JSON.stringify(r.body)).toBe(200);
		expect(r.body.open).toBe(0);
		expect(r.body.rejudged.settled).toEqual([list[1].id, list[2].id, list[3].id]);
		const after = await rows(id);
		const rita = await userIdOf(ACCOUNTS.reviewer);
		expect(after.map((d) => [d.field, d.resolution, d.resolved_value, d.settled_by, d.resolved_by])).toEqual([
			['raw', 'first', '24', null, rita],
			['z', 'recomputed', '0.98', 'raw_decision', rita],
			['t', 'recomputed', '60', 'raw_decision', rita],
			['percentile', 'recomputed', '84', 'raw_decision', rita]
		]);
		const trail = await select<{ action: string; actor_id: number; entity_id: string }>(
			`SELECT action, actor_id, entity_id FROM audit_events WHERE protocol_id = :id AND entity = 'discrepancy' ORDER BY id`,
			{ id }
		);
		expect(trail).toEqual([
			{ action: 'resolve', actor_id: rita, entity_id: String(list[0].id) },
			{ action: 'settled_by_raw_decision', actor_id: rita, entity_id: String(list[1].id) },
			{ action: 'settled_by_raw_decision', actor_id: rita, entity_id: String(list[2].id) },
			{ action: 'settled_by_raw_decision', actor_id: rita, entity_id: String(list[3].id) }
		]);
		// charges: raw 24 kept → the second pass's 42 is one error (digits swapped); nothing else
		const events = await select<{ scorer_id: number; field: string; kind: string; judgement: number }>(
			'SELECT scorer_id, field, kind, judgement FROM error_events WHERE protocol_id = :id',
			{ id }
		);
		expect(events).toEqual([{ scorer_id: await userIdOf(ACCOUNTS.scorer2), field: 'raw', kind: 'transposition', judgement: 0 }]);
		// sign-off needs no confirmation (nothing kept against the recomputation); the summary holds raw 24's scores
		const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
		const so = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } });
		expect(so.status, await so.clone().text()).toBe(200);
		const csv = await (await reviewer.get(`/protocols/${id}/summary.csv`)).text();
		expect(scoresIn(csv, 'Word Harvest')).toEqual(['24', '0.98', '', '', '60', '84']);
	});

	it('keeping raw 42 leaves the derived cards open against 42, still named as right for the other raw score', async () => {
		const id = await raw42();
		const list = await rows(id);
		const r = await resolve(list[0].id, { choice: 'second' });
		expect(r.status).toBe(200);
		expect(r.body.rejudged.settled).toEqual([]);
		const after = await rows(id);
		expect(after.slice(1).map((d) => [d.field, d.resolution, d.expected, d.kind])).toEqual([
			['z', null, '4.89', 'follows_other_raw'],
			['t', null, '80', 'follows_other_raw'],
			['percentile', null, '99', 'follows_other_raw']
		]);
	});

	it('choosing another raw score (25) recomputes from it: open cards show 1.20 / 62 / 88, and fields both passes agreed on are checked too', async () => {
		const id = await raw42();
		const list = await rows(id);
		const noteless = await resolve(list[0].id, { choice: 'other', value: '25' });
		expect(noteless.status).toBe(400);
		const r = await resolve(list[0].id, { choice: 'other', value: '25', note: 'record form shows 25' });
		expect(r.status, JSON.stringify(r.body)).toBe(200);
		const after = await rows(id);
		// the second pass's three cards: open, new recomputed values; the first pass's values (right for 24)
		// no longer fit the kept raw score either: three new cards for the first pass
		expect(after.slice(1).map((d) => [d.field, d.pass, d.value, d.expected, d.resolution])).toEqual([
			['z', 'second', '0.98', '1.20', null],
			['t', 'second', '60', '62', null],
			['percentile', 'second', '84', '88', null],
			['z', 'first', '0.98', '1.20', null],
			['t', 'first', '60', '62', null],
			['percentile', 'first', '84', '88', null]
		]);
		expect(r.body.rejudged.updated).toHaveLength(3);
		expect(r.body.rejudged.added).toHaveLength(3);
		// changing the raw decision back to 24 re-judges again: the second pass's cards close, the
		// first pass's added cards fit 24 and close too
		const back = await resolve(list[0].id, { choice: 'first', note: 'looked again: 24' });
		expect(back.status, JSON.stringify(back.body)).toBe(200);
		expect(back.body.open).toBe(0);
	});

	it('a stale raw decision (someone else first) changes nothing: no derived card is touched', async () => {
		const id = await raw42();
		const list = await rows(id);
		const before = await rows(id);
		const res = await reviewer.request(`/api/v1/discrepancies/${list[0].id}`, {
			method: 'PATCH',
			json: { lockVersion: list[0].lock_version + 7, choice: 'first' }
		});
		expect(res.status).toBe(409);
		expect(await rows(id)).toEqual(before);
	});
});

describe('kept values that contradict the recomputation', () => {
	it('need a note, are listed for one confirmation at sign-off, are marked on the Summary, and their charges rest on the reviewer’s judgement on Audit', async () => {
		const id = await raw42();
		const list = await rows(id);
		expect((await resolve(list[0].id, { choice: 'second', note: 'record form shows 42' })).status).toBe(200);
		// keep the second pass's T 60 although 42 gives 80
		const t = (await rows(id)).find((d) => d.field === 't')!;
		const noNote = await resolve(t.id, { choice: 'second' });
		expect(noNote.status).toBe(400);
		expect(noNote.body.field).toBe('note');
		expect((await resolve(t.id, { choice: 'second', note: 'examiner wrote 60 on the form' })).status).toBe(200);
		for (const d of (await rows(id)).filter((x) => x.resolution === null)) expect((await resolve(d.id, { choice: 'recomputed' })).status).toBe(200);
		const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
		const unconfirmed = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } });
		const u = await unconfirmed.json();
		expect(unconfirmed.status).toBe(409);
		expect(u.code).toBe('confirm_kept');
		expect(u.message).toContain('kept 60, recomputed 80');
		const ok = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version, confirmKept: true } });
		expect(ok.status).toBe(200);
		const html = await (await reviewer.get(`/protocols/${id}/summary`)).text();
		expect(html).toContain('kept against recomputed 80: examiner wrote 60 on the form');
		// charges: raw 42 kept → the first pass's 24 (digits swapped); T: the second pass's own 60 was kept →
		// none; z and percentile: recomputed 4.89 and 99 kept → the second pass's 0.98 and 84 are errors
		const events = await select<{ scorer_id: number; field: string; judgement: number }>(
			'SELECT scorer_id, field, judgement FROM error_events WHERE protocol_id = :id ORDER BY field, scorer_id',
			{ id }
		);
		const [sam, sue] = [await userIdOf(ACCOUNTS.scorer), await userIdOf(ACCOUNTS.scorer2)];
		expect(events).toEqual([
			{ scorer_id: sam, field: 'raw', judgement: 0 },
			{ scorer_id: sue, field: 'z', judgement: 0 },
			{ scorer_id: sue, field: 'percentile', judgement: 0 }
		]);
	});

	it('a charge whose kept value contradicts the recomputation is listed on Audit with the note', async () => {
		const id = await raw42((first, second) => {
			second['word-harvest'].raw = '24';
			second['word-harvest'].t = '66'; // the second scorer looked up T 66 (right would be 60)
		});
		const list = await rows(id);
		expect(list.map((d) => [d.field, d.pass, d.expected])).toEqual([['t', 'second', '60']]);
		// the reviewer keeps 65 (neither pass's value, nor the recomputed 60), with a note
		expect((await resolve(list[0].id, { choice: 'other', value: '65', note: 'form shows 65, checked twice' })).status).toBe(200);
		const ev = await select<{ judgement: number; scorer_id: number }>('SELECT judgement, scorer_id FROM error_events WHERE protocol_id = :id', { id });
		// the second pass's 66 is not the kept 65 → charged; 65 contradicts the recomputed 60 → on the reviewer's judgement
		expect(ev).toEqual([{ judgement: 1, scorer_id: await userIdOf(ACCOUNTS.scorer2) }]);
		const report = await (await lead.get('/api/v1/audit/judgements')).json();
		const mine = report.rows.find((r: { protocol_id: number }) => r.protocol_id === id);
		expect(mine).toMatchObject({ kept: '65', recomputed: '60', note: 'form shows 65, checked twice', field_name: 'T-score' });
	});
});

describe('amendment of a verified protocol', () => {
	/**
	 * switch-rule (invented norms), lower is better, group ages 30;0–39;11: mean 6.8, SD 4.4; reports
	 * standard (bounds 55–145), T and percentile. By hand:
	 *   raw 5: z = −(5 − 6.8)/4.4 = 0.40909 → standard 106.14 → 106, T 54.09 → 54, percentile Φ(0.409) ≈ .659 → 66
	 *   raw 3: z = −(3 − 6.8)/4.4 = 0.86364 → standard 112.95 → 113, T 58.64 → 59, percentile Φ(0.864) ≈ .806 → 81
	 */
	it('a lead corrects one raw score both passes agreed on: only that card and its derived scores are reviewed again; every other decision stands', async () => {
		const id = await raw42();
		const list = await rows(id);
		expect((await resolve(list[0].id, { choice: 'first' })).status).toBe(200);
		let p = await selectOne<{ lock_version: number; round: number }>('SELECT lock_version, round FROM protocols WHERE id = :id', { id });
		expect((await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } })).status).toBe(200);
		const before = await select<{ position: number; resolution: string; resolved_value: string; resolved_by: number }>(
			'SELECT position, resolution, resolved_value, resolved_by FROM discrepancies WHERE protocol_id = :id AND round = 1 ORDER BY position',
			{ id }
		);
		const first = await select<{ scores: unknown }>("SELECT scores FROM passes WHERE protocol_id = :id AND round = 1 AND which = 'first'", { id });
		expect(jsonValue<Scores>(first[0].scores)['switch-rule']).toMatchObject({ raw: '5', standard: '106', t: '54', percentile: '66' });

		// a reviewer may only request; a lead approves
		const req = await reviewer.request(`/api/v1/protocols/${id}/amendments`, {
			method: 'POST',
			json: { test: 'switch-rule', field: 'raw', value: '3', reason: 'record form shows 3 errors, both passes read 5' }
		});
		const rq = await req.json();
		expect(req.status, JSON.stringify(rq)).toBe(200);
		expect(rq.status).toBe('requested');
		expect((await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id }))!.status).toBe('verified');
		const approve = await lead.request(`/api/v1/amendments/${rq.id}`, { method: 'POST', json: { decision: 'approve' } });
		const ap = await approve.json();
		expect(approve.status, JSON.stringify(ap)).toBe(200);
		expect(ap).toMatchObject({ status: 'applied', round: 2 });
		// the reviewer's round-2 e-mail is written in the same transaction and names the amendment: the
		// test's name, the field and the reason (read back from its outbox row: the reviewer settles the
		// round below before the worker would send it)
		const mailRow = await selectOne<{ payload: unknown }>("SELECT payload FROM outbox WHERE idempotency_key LIKE :k AND kind = 'review_first'", {
			k: `review:${id}:r2:%`
		});
		expect(jsonValue<{ why?: unknown }>(mailRow!.payload).why).toEqual({
			action: 'amendment',
			reason: 'record form shows 3 errors, both passes read 5',
			field: 'Switching Rule Errors, raw score'
		});

		// round 2: the earlier rows are carried with their decisions, none reopened
		const round2 = await select<{
			position: number;
			test_code: string;
			field: string;
			resolution: string | null;
			resolved_value: string | null;
			resolved_by: number | null;
			value: string | null;
			other: string | null;
		}>(
			'SELECT position, test_code, field, resolution, resolved_value, resolved_by, value, other FROM discrepancies WHERE protocol_id = :id AND round = 2 ORDER BY position',
			{ id }
		);
		expect(
			round2
				.slice(0, before.length)
				.map((d) => ({ position: d.position, resolution: d.resolution, resolved_value: d.resolved_value, resolved_by: d.resolved_by }))
		).toEqual(before);
		// the one open card: switch-rule's raw score, both passes' 5 against the amended 3
		const open = round2.filter((d) => d.resolution === null);
		expect(open.map((d) => [d.test_code, d.field, d.value, d.other])).toEqual([['switch-rule', 'raw', '5', '5']]);
		const trail = await selectOne<{ old_value: string; new_value: string; reason: string }>(
			"SELECT old_value, new_value, reason FROM audit_events WHERE protocol_id = :id AND action = 'amend'",
			{ id }
		);
		expect(JSON.parse(trail!.old_value)).toMatchObject({ test: 'switch-rule', field: 'raw', value: '5', round: 1 });
		expect(JSON.parse(trail!.new_value)).toMatchObject({ test: 'switch-rule', field: 'raw', value: '3', round: 2 });
		expect(trail!.reason).toBe('record form shows 3 errors, both passes read 5');

		// the reviewer keeps 3: switch-rule's derived scores are judged against raw 3 (none of 106/54/66 fits)
		const rawCard = await selectOne<{ id: number }>(
			"SELECT id FROM discrepancies WHERE protocol_id = :id AND round = 2 AND test_code = 'switch-rule' AND field = 'raw'",
			{ id }
		);
		const kept = await resolve(rawCard!.id, { choice: 'other', value: '3', note: 'record form shows 3 errors, both passes read 5' });
		expect(kept.status, JSON.stringify(kept.body)).toBe(200);
		const derived = await select<{ field: string; value: string; expected: string }>(
			"SELECT field, value, expected FROM discrepancies WHERE protocol_id = :id AND round = 2 AND test_code = 'switch-rule' AND field <> 'raw' AND resolved_at IS NULL ORDER BY position",
			{ id }
		);
		expect(derived).toEqual([
			{ field: 'standard', value: '106', expected: '113' },
			{ field: 't', value: '54', expected: '59' },
			{ field: 'percentile', value: '66', expected: '81' }
		]);
		// nothing of any other test opened
		expect(
			(await select("SELECT id FROM discrepancies WHERE protocol_id = :id AND round = 2 AND resolved_at IS NULL AND test_code <> 'switch-rule'", { id })).length
		).toBe(0);
		for (const d of await select<{ id: number }>('SELECT id FROM discrepancies WHERE protocol_id = :id AND round = 2 AND resolved_at IS NULL', { id })) {
			expect((await resolve(d.id, { choice: 'recomputed' })).status).toBe(200);
		}
		p = await selectOne<{ lock_version: number; round: number }>('SELECT lock_version, round FROM protocols WHERE id = :id', { id });
		expect((await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } })).status).toBe(200);
		const csv = await (await lead.get(`/protocols/${id}/summary.csv`)).text();
		expect(scoresIn(csv, 'Switching Rule Errors')).toEqual(['3', '', '113', '', '59', '81']);
		const html = await (await lead.get(`/protocols/${id}/summary`)).text();
		expect(html).toContain('Amendments');
		expect(html).toContain('reason: record form shows 3 errors, both passes read 5');
		// the raw-42 decisions of round 1 stand in the summary too
		expect(scoresIn(csv, 'Word Harvest')).toEqual(['24', '0.98', '', '', '60', '84']);
	});

	it('refuses an amendment of a protocol in review, an unreported field, and a value that is already the verified one', async () => {
		const id = await raw42();
		const inReview = await lead.request(`/api/v1/protocols/${id}/amendments`, {
			method: 'POST',
			json: { test: 'switch-rule', field: 'raw', value: '3', reason: 'record form shows 3' }
		});
		expect(inReview.status).toBe(409);
		const list = await rows(id);
		await resolve(list[0].id, { choice: 'first' });
		const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
		await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } });
		const unreported = await lead.request(`/api/v1/protocols/${id}/amendments`, {
			method: 'POST',
			json: { test: 'switch-rule', field: 'z', value: '1', reason: 'a reason here' }
		});
		expect(unreported.status).toBe(400);
		const same = await lead.request(`/api/v1/protocols/${id}/amendments`, {
			method: 'POST',
			json: { test: 'switch-rule', field: 'raw', value: '5', reason: 'a reason here' }
		});
		expect(same.status).toBe(400);
		expect((await same.json()).message).toContain('already the verified');
		const scorer = await s1.request(`/api/v1/protocols/${id}/amendments`, {
			method: 'POST',
			json: { test: 'switch-rule', field: 'raw', value: '3', reason: 'a reason here' }
		});
		expect(scorer.status).toBe(403);
	});
});

describe('reopen with a reason', () => {
	let reopenedId = 0;
	it('keeps the previous decisions as defaults', { timeout: 150_000 }, async () => {
		const id = await raw42();
		const list = await rows(id);
		expect((await resolve(list[0].id, { choice: 'first' })).status).toBe(200);
		const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
		expect((await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } })).status).toBe(200);
		const re = await lead.action(`/protocols/${id}?/reopen`, { reason: 'The scan was of another page; check again.' });
		expect(re.body.type).toBe('success');
		// round 2: every row open again, each pointing at its round-1 decision
		const r2 = await select<{ carried_from: number; resolved_at: Date | null }>(
			'SELECT carried_from, resolved_at FROM discrepancies WHERE protocol_id = :id AND round = 2 ORDER BY position',
			{ id }
		);
		expect(r2.map((d) => [d.carried_from, d.resolved_at])).toEqual(list.map((d) => [d.id, null]));
		// the Review page offers the earlier decisions: the raw card's "First pass" is chosen by default
		const html = await (await reviewer.get(`/protocols/${id}/review`)).text();
		expect(html).toContain('offered as the default');
		expect(html).toContain('Keep the previous round’s decisions');
		reopenedId = id;
	});
	it('the reopen e-mail names the round and the reason', { timeout: 150_000 }, async () => {
		const code = (await selectOne<{ code: string }>('SELECT e.code FROM protocols p JOIN examinees e ON e.id = p.examinee_id WHERE p.id = :id', {
			id: reopenedId
		}))!.code;
		const mail = await waitFor(
			async () => (await caughtMail(ACCOUNTS.reviewer)).find((m) => m.subject.includes(code) && m.text.includes('round 2')),
			90_000,
			1_000
		);
		expect(mail.text).toContain('It was reopened for review round 2. Reason: The scan was of another page; check again.');
	});
});

describe('a composite waits on its parts (Tidewater battery)', () => {
	/**
	 * Examinee born 1990-03-10, tested 2025-11-20 (35;8;10, band a30), education 14; the right
	 * look-ups are worked by hand in tests/e2e/norm-forms-workflow.test.ts (invented tables,
	 * db/seeds/profile.ts). Tile Build raw 16 is the a30 row 16 → scaled 14; Memory Index = Harbour
	 * Word Recall scaled 13 + Tile Build scaled 14 = 27 → standard R(100 + 15·7/5.2) = R(120.19) = 120,
	 * percentile 91. The first pass reads Tile Build off the next row (17–18 → 15) and carries it:
	 * 13 + 15 = 28 → standard R(100 + 15·8/5.2) = R(123.08) = 123, percentile R(100·Φ(1.538)) = 94.
	 */

	it('its carried cards cannot be decided while a part is open (409 waits_on_parts), the Review page says so, and after the part they can', async () => {
		const id = await tidewaterProtocol({ lead, first: s1, second: s2, reviewer }, duties, { first: tidewaterCarriedSlip() });
		made.push(id);
		const tile = await rows(id, 'tile-build');
		expect(tile.map((d) => [d.field, d.pass, d.kind, d.value, d.expected])).toEqual([['scaled', 'first', 'adjacent_row', '15', '14']]);
		const index = await rows(id, 'memory-index');
		expect(index.map((d) => [d.field, d.kind, d.value, d.expected])).toEqual([
			['sum', 'carried', '28', '27'],
			['standard', 'carried', '123', '120'],
			['percentile', 'carried', '94', '91']
		]);
		const early = await resolve(index[1].id, { choice: 'recomputed' });
		expect(early.status).toBe(409);
		expect(early.body.code).toBe('waits_on_parts');
		const html = await (await reviewer.get(`/protocols/${id}/review`)).text();
		expect(html).toContain('waits on its parts');
		expect(html).toContain('Parts (scaled scores): first pass 13 + 15, second pass 13 + 14');
		expect((await resolve(tile[0].id, { choice: 'recomputed' })).status).toBe(200);
		const later = await resolve(index[1].id, { choice: 'recomputed' });
		expect(later.status, JSON.stringify(later.body)).toBe(200);
		expect(later.body.resolvedValue).toBe('120');
		// the protocol's history names the composite as the screens do, not by its code
		const page = await (await lead.get(`/protocols/${id}`)).text();
		expect(page).toContain('Memory Index, ');
		expect(page).not.toContain('memory-index, ');
	});
});

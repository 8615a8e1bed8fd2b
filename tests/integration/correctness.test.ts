/**
 * Scoring and workflow correctness (issue 12, items 1–6 and 9 on the server), against the running
 * app and the real MariaDB. Every expected age, group and score is worked out by hand below, with
 * the arithmetic written beside it; none comes from the code under test.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, uniqueCode, userId, type Scores } from '../helpers/workflow';
import { select, selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

let lead: Client, s1: Client, s2: Client, reviewer: Client, admin: Client;
beforeAll(async () => {
	[lead, s1, s2, reviewer, admin] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('reviewer'), signedIn('admin')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
const uniq = () => `${Date.now().toString(36)}${Math.floor(Math.random() * 1e6).toString(36)}`;
const post = (c: Client, path: string, json: unknown) => c.request(path, { method: 'POST', json });
const put = (c: Client, path: string, json: unknown) => c.request(path, { method: 'PUT', json });

/** The New protocol form's fields for the brief-screen battery and the three demo duties. */
async function formFields(over: Record<string, string> = {}): Promise<Record<string, string>> {
	const battery = await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'brief-screen'");
	return {
		code: uniqueCode('C'),
		birthDate: '1988-05-17',
		sex: 'F',
		educationYears: '14',
		batteryId: String(battery!.id),
		testDate: '2026-11-20',
		firstScorerId: String(await userId(ACCOUNTS.scorer)),
		secondScorerId: String(await userId(ACCOUNTS.scorer2)),
		reviewerId: String(await userId(ACCOUNTS.reviewer)),
		...over
	};
}

// ------------------------------------------------------------------------------------------------
describe('item 1: the norm set’s age rule decides the age and the group', () => {
	it('two norm sets (truncate / round days) give 359 and 360 months, so groups a18 and a30, for one birth and test date', async () => {
		// Birth 1996-05-10, test 2026-04-30. Column subtraction:
		//   test   2026;04;30
		//   birth  1996;05;10
		//   days   30 − 10 = 20; months 4 − 5 = −1 → borrow a year: 11 months, 2026 − 1996 − 1 = 29 years
		// Age 29;11;20. Truncating drops the 20 days: 29 × 12 + 11 = 359 months (group a18: 216–359).
		// Rounding days up from 15 (20 ≥ 15): 359 + 1 = 360 months (group a30: 360–479).
		const groups = [
			{ test_code: 'word-recall', group_code: 'a18', age_min_months: 216, age_max_months: 359, mean: 25, sd: 4 },
			{ test_code: 'word-recall', group_code: 'a30', age_min_months: 360, age_max_months: 479, mean: 24, sd: 4 }
		];
		const made: Record<string, { set: number; battery: number }> = {};
		for (const rounding of ['truncate', 'round_days'] as const) {
			const r = await post(lead, '/api/v1/norm-sets', {
				code: `rule-${rounding.replace('_', '-')}-${uniq()}`,
				name: `Age rule ${rounding}`,
				source: 'Invented for a test',
				version: '1',
				borrow_days: '30',
				rounding
			});
			expect(r.status).toBe(201);
			const set = (await r.json()).normSet.id as number;
			// Groups only: this PUT must not touch the age rule (it used to reset it to truncate).
			expect((await put(lead, `/api/v1/norm-sets/${set}`, { groups })).status).toBe(200);
			const b = await post(lead, '/api/v1/batteries', { code: `rule-${uniq()}`, name: `Rule battery ${rounding}`, tests: ['word-recall'], norm_set_id: set });
			expect(b.status).toBe(201);
			made[rounding] = { set, battery: (await b.json()).battery.id };
		}
		const got: Record<string, { age_text: string; age_months: number; group_code: string }> = {};
		for (const rounding of ['truncate', 'round_days'] as const) {
			const r = await lead.action(
				'/protocols/new',
				await formFields({ birthDate: '1996-05-10', testDate: '2026-04-30', batteryId: String(made[rounding].battery), normSetId: String(made[rounding].set) })
			);
			expect(r.body.type, JSON.stringify(r.body)).toBe('redirect');
			const id = Number(r.body.location!.match(/\/protocols\/(\d+)/)![1]);
			got[rounding] = (await selectOne(
				`SELECT p.age_text, p.age_months, ng.group_code FROM protocols p JOIN protocol_tests pt ON pt.protocol_id = p.id JOIN norm_groups ng ON ng.id = pt.norm_group_id WHERE p.id = :id`,
				{ id }
			))!;
		}
		expect(got.truncate).toEqual({ age_text: '29;11;20', age_months: 359, group_code: 'a18' });
		expect(got.round_days).toEqual({ age_text: '29;11;20', age_months: 360, group_code: 'a30' });
	});
});

// ------------------------------------------------------------------------------------------------
describe('item 2: a resolution racing the sign-off', () => {
	it('30 races: exactly one of them wins each time, and a verified protocol never changes afterwards', async () => {
		const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
		const wins = { signOff: 0, resolution: 0 };
		for (let i = 0; i < 30; i++) {
			const id = await createViaForm(lead, duties);
			const first = await correctScores(id, RAWS);
			const second: Scores = JSON.parse(JSON.stringify(first));
			second['word-recall'].standard = first['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2'); // a transposition
			expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
			expect((await saveAndSubmit(s2, id, second)).status).toBe(200);
			const [d] = await select<{ id: number; lock_version: number }>('SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id', { id });
			const r1 = await reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: d.lock_version } });
			expect(r1.status).toBe(200);
			const { lockVersion } = await r1.json();
			const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
			// The reviewer changes their mind (first pass: equal to the recomputed value, no note needed)
			// while the sign-off of the view they had is on its way.
			const [change, sign] = await Promise.all([
				reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'first', lockVersion } }),
				reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: lock } })
			]);
			const statuses = [change.status, sign.status];
			expect(statuses.sort(), `race ${i}: change ${change.status} ${await change.text()}, sign-off ${sign.status}`).toEqual([200, 409]);
			const p = (await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id }))!;
			const dNow = (await selectOne<{ resolution: string }>('SELECT resolution FROM discrepancies WHERE id = :id', { id: d.id }))!;
			const events = await select<{ id: number; action: string }>(
				"SELECT id, action FROM audit_events WHERE protocol_id = :id AND action IN ('resolve', 'change_resolution', 'sign_off') ORDER BY id",
				{ id }
			);
			if (sign.status === 200) {
				wins.signOff++;
				expect(p.status).toBe('verified');
				expect(dNow.resolution).toBe('recomputed');
				expect(events.map((e) => e.action)).toEqual(['resolve', 'sign_off']);
			} else {
				wins.resolution++;
				expect(p.status).toBe('in_review');
				expect(dNow.resolution).toBe('first');
				expect(events.map((e) => e.action)).toEqual(['resolve', 'change_resolution']);
				expect((await sign.json()).message).toMatch(/changed since you opened it/);
			}
		}
		console.log(`[race] sign-off won ${wins.signOff}, the resolution won ${wins.resolution} of 30`);
		expect(wins.signOff + wins.resolution).toBe(30);
	}, 300_000);
});

// ------------------------------------------------------------------------------------------------
describe('item 3: an empty raw score is not a raw score of 0', () => {
	it('derived scores follow the pass whose raw 0 was kept, not the pass that left the raw score empty', async () => {
		const id = await createViaForm(lead, duties); // born 1988-05-17, tested 2026-11-20: 38;6;3 = 462 months, group a30
		const first = await correctScores(id, {});
		// Switching Rule Errors (lower is better), group a30: mean 6.8, SD 4.4 (db/seeds/catalog.ts).
		// Raw 0: z = −(0 − 6.8) / 4.4 = 1.54545…
		//   standard = 100 + 15 × 1.54545 = 123.18 → 123
		//   T        = 50 + 10 × 1.54545 = 65.45  → 65
		//   percentile = 100 × Φ(1.5455); normal table Φ(1.54) = 0.93822, Φ(1.55) = 0.93943,
		//   interpolated 0.93822 + 0.55 × 0.00121 = 0.93889 → 93.9 → 94 (whole numbers)
		const second: Scores = JSON.parse(JSON.stringify(first));
		second['switch-rule'] = { raw: '0', standard: '123', t: '65', percentile: '94' };
		// The first scorer left the raw score empty and wrote the same scores with a decimal zero
		// (numerically equal, so no discrepancy; only which pass they are taken from shows).
		first['switch-rule'] = { raw: null, standard: '123.0', t: '65.0', percentile: '94.0' };
		expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
		expect((await saveAndSubmit(s2, id, second)).status).toBe(200);
		const ds = await select<{ id: number; test_code: string; field: string; lock_version: number }>(
			'SELECT id, test_code, field, lock_version FROM discrepancies WHERE protocol_id = :id',
			{ id }
		);
		expect(ds.map((d) => `${d.test_code}.${d.field}`)).toEqual(['switch-rule.raw']);
		const r = await reviewer.request(`/api/v1/discrepancies/${ds[0].id}`, { method: 'PATCH', json: { choice: 'second', lockVersion: ds[0].lock_version } });
		expect(r.status).toBe(200);
		const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
		expect((await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: lock } })).status).toBe(200);
		const csv = (await (await reviewer.get(`/protocols/${id}/summary.csv`)).text()).split('\r\n');
		const head = csv[0].split(',');
		const row = csv.find((l) => l.includes('Switching Rule Errors'))!.split(',');
		const col = (name: string) => row[head.indexOf(name)];
		expect([col('raw'), col('standard'), col('t'), col('percentile')]).toEqual(['0', '123', '65', '94']);
	});
});

/** A Word Recall norm group of ages min–max months (mean 20, SD 4: invented for these tests). */
const g = (code: string, min: number, max: number) => ({
	test_code: 'word-recall',
	group_code: code,
	age_min_months: min,
	age_max_months: max,
	mean: 20,
	sd: 4
});

// ------------------------------------------------------------------------------------------------
describe('item 4: the norm-set PUT is one transaction', () => {
	it('a refused group change leaves the name and the age rule as they were', async () => {
		const r = await post(lead, '/api/v1/norm-sets', {
			code: `atomic-${uniq()}`,
			name: 'Before the change',
			source: 'Invented for a test',
			version: '1',
			borrow_days: 'actual',
			rounding: 'round_days'
		});
		const set = (await r.json()).normSet.id as number;
		// 216–359 and 350–479 overlap by 350–359: refused (422)
		const bad = await put(lead, `/api/v1/norm-sets/${set}`, {
			name: 'After the change',
			rounding: 'truncate',
			groups: [g('a18', 216, 359), g('a30', 350, 479)]
		});
		expect(bad.status).toBe(422);
		const unknown = await put(lead, `/api/v1/norm-sets/${set}`, { name: 'After the change', groups: [{ ...g('a18', 216, 359), test_code: 'no-such-test' }] });
		expect([400, 422]).toContain(unknown.status); // an unknown test code is refused (the norm-form check answers 422)
		const now = await (await lead.get(`/api/v1/norm-sets/${set}`)).json();
		expect(now.normSet.name).toBe('Before the change');
		expect(now.normSet.age_rule).toEqual({ borrowDays: 'actual', rounding: 'round_days' });
		expect(now.groups).toEqual([]);
		const audit = await select<{ action: string }>("SELECT action FROM audit_events WHERE entity = 'norm_set' AND entity_id = :set ORDER BY id", { set });
		expect(audit.map((a) => a.action)).toEqual(['create']);
	});
});

describe('the norm-set GET reads one snapshot', () => {
	it('while PUTs replace the groups (2 ↔ 3), every GET’s group count agrees with the groups it lists', async () => {
		const r = await post(lead, '/api/v1/norm-sets', { code: `snap-${uniq()}`, name: 'Snapshot', source: 'Invented for a test', version: '1' });
		const set = (await r.json()).normSet.id as number;
		const two = [g('a18', 216, 359), g('a30', 360, 479)];
		const three = [g('a18', 216, 299), g('a25', 300, 359), g('a30', 360, 479)];
		const seen: { count: number; listed: number }[] = [];
		for (let round = 0; round < 12; round++) {
			const [w] = await Promise.all([
				put(lead, `/api/v1/norm-sets/${set}`, { groups: round % 2 ? two : three }),
				...Array.from({ length: 4 }, async () => {
					const got = await (await lead.get(`/api/v1/norm-sets/${set}`)).json();
					seen.push({ count: got.normSet.groups, listed: got.groups.length });
				})
			]);
			expect(w.status).toBe(200);
		}
		expect(seen).toHaveLength(48);
		for (const x of seen) {
			expect([0, 2, 3]).toContain(x.listed);
			expect(x.count).toBe(x.listed);
		}
	});
});

// ------------------------------------------------------------------------------------------------
describe('item 5: impossible input answers 4xx naming what is wrong', () => {
	it('2023-02-30 as a birth date, a test date, and an audit filter', async () => {
		const birth = await lead.action('/protocols/new', await formFields({ birthDate: '2023-02-30' }));
		expect(birth.body.status).toBe(400);
		expect(birth.body.data).toContain('2023-02-30 does not exist');
		expect(birth.body.data).toContain('birthDate');
		const test = await lead.action('/protocols/new', await formFields({ testDate: '2023-02-30' }));
		expect(test.body.status).toBe(400);
		expect(test.body.data).toContain('testDate');
		expect(test.body.data).toContain('2023-02-30 does not exist');
		for (const bad of ['2023-02-29', '2024-04-31', '2024-13-01', '2024-00-10']) {
			const r = await lead.action('/protocols/new', await formFields({ testDate: bad }));
			expect(r.body.status, bad).toBe(400);
		}
		const audit = await lead.get('/api/v1/audit/kinds?from=2023-02-30');
		expect(audit.status).toBe(400);
		expect((await audit.json()).errors.from).toMatch(/2023-02-30 does not exist/);
	});

	it('/protocols?page= that is not a whole page number', async () => {
		for (const page of ['1.5', '1e308', 'Infinity', '-1', '0', 'abc', '9'.repeat(30)]) {
			const r = await lead.request(`/protocols?page=${encodeURIComponent(page)}`, { headers: { accept: 'text/html' } });
			expect(r.status, page).toBe(400);
			expect(await r.text()).toContain('page: use a whole page number');
		}
		expect((await lead.get('/protocols?page=2')).status).toBe(200);
	});

	it('an unknown account id in the People actions', async () => {
		for (const [action, form] of [
			['roles', { id: '999999', roles: 'scorer' }],
			['active', { id: '999999', active: '0' }],
			['resend', { id: '999999' }]
		] as const) {
			const r = await admin.action(`/people?/${action}`, form);
			expect(r.body.status, action).toBe(400);
			expect(r.body.data, action).toContain('No account has id 999999');
		}
	});

	it('a redirectTo with CR/LF is not followed into a header (safe fallback, no 500)', async () => {
		const target = '/protocols\r\nSet-Cookie: injected=1';
		const signedInGet = await lead.request(`/signin?redirectTo=${encodeURIComponent(target)}`);
		expect(signedInGet.status).toBe(303);
		expect(signedInGet.headers.get('location')).toBe('/');
		expect(signedInGet.headers.get('set-cookie') ?? '').not.toContain('injected');
		const anon = await new Client().get(`/signin?redirectTo=${encodeURIComponent(target)}`);
		expect(anon.status).toBe(200);
		const c = new Client();
		const r = await c.action('/signin', { providerId: 'credentials', email: ACCOUNTS.scorer, password: 'crosstally-demo', redirectTo: target });
		expect(r.status).toBeLessThan(500);
		expect(JSON.stringify(r.body)).not.toContain('injected=1\r');
	});

	it('a new examinee code created by several leads at once: one examinee, the others a 409 with a message', async () => {
		const code = uniqueCode('RACE');
		const fields = await formFields({ code });
		const answers = await Promise.all(Array.from({ length: 6 }, () => lead.action('/protocols/new', fields)));
		for (const a of answers) {
			expect(a.status).toBeLessThan(500);
			if (a.body.type !== 'redirect') {
				expect(a.body.status).toBe(409);
				expect(a.body.data).toContain(`Examinee code ${code} was being created by someone else`);
			}
		}
		expect(answers.filter((a) => a.body.type === 'redirect').length).toBeGreaterThanOrEqual(1);
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM examinees WHERE code = :code', { code }))!.n).toBe(1);
	});

	it('one e-mail invited several times at once: one account, the others a 400 naming the e-mail', async () => {
		const email = `race-${uniq()}@demo.crosstally.test`;
		const answers = await Promise.all(Array.from({ length: 6 }, () => admin.action('/people?/invite', { email, name: 'Race Person', roles: 'scorer' })));
		for (const a of answers) {
			expect(a.status).toBeLessThan(500);
			if (a.body.type !== 'success') {
				expect(a.body.status).toBe(400);
				expect(a.body.data).toContain('An account with this e-mail already exists.');
			}
		}
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM users WHERE email = :email', { email }))!.n).toBe(1);
	});
});

// ------------------------------------------------------------------------------------------------
describe('item 6: creating a protocol never guesses', () => {
	it('no norm group covers the examinee: a 422 listing each test with its groups; with a group and a reason per test it is created', async () => {
		// Born 2012-03-01, tested 2026-11-20: 14;8;19 = 14 × 12 + 8 = 176 months, below the youngest
		// demo group (a18 starts at 18;0 = 216 months), so no group covers any of the five tests.
		const fields = await formFields({ birthDate: '2012-03-01' });
		const r = await lead.action('/protocols/new', fields);
		expect(r.body.status).toBe(422);
		for (const code of ['speeded-match', 'word-recall', 'word-recall-delayed', 'word-harvest', 'switch-rule']) expect(r.body.data).toContain(code);
		expect(r.body.data).toContain('No norm group covers age 14;8;19 for 5 tests');
		// the groups offered are named by what they cover: a18 is 216–359 months = 18×12 → 18;0 to 29×12 + 11 → 29;11
		expect(r.body.data).toContain('ages 18;0–29;11');
		expect(r.body.data).not.toContain('a18: ');
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM examinees WHERE code = :code', { code: fields.code }))!.n).toBe(0);
		// A group for every test but a reason too short for one: still refused, naming that test.
		const overrides: Record<string, string> = {};
		for (const code of ['speeded-match', 'word-recall', 'word-recall-delayed', 'switch-rule']) {
			overrides[`override.${code}`] = 'a18';
			overrides[`reason.${code}`] = 'Youngest band; no adolescent norms in this set.';
		}
		overrides['override.word-harvest'] = 'a18-e13';
		overrides['reason.word-harvest'] = 'no';
		const short = await lead.action('/protocols/new', { ...fields, ...overrides });
		expect(short.body.status).toBe(422);
		// a18-e13: the same ages, 13–30 years of education (the demo catalog's upper band)
		expect(short.body.data).toContain('Give a reason for using the norm group for ages 18;0–29;11, 13–30 years of education for Word Harvest');
		overrides['reason.word-harvest'] = 'Youngest band, 13+ years of education split.';
		const ok = await lead.action('/protocols/new', { ...fields, ...overrides });
		expect(ok.body.type, JSON.stringify(ok.body)).toBe('redirect');
		const id = Number(ok.body.location!.match(/\/protocols\/(\d+)/)![1]);
		const rows = await select<{ group_code: string; override_reason: string }>(
			'SELECT ng.group_code, pt.override_reason FROM protocol_tests pt JOIN norm_groups ng ON ng.id = pt.norm_group_id WHERE pt.protocol_id = :id ORDER BY pt.position',
			{ id }
		);
		expect(rows.map((x) => x.group_code)).toEqual(['a18', 'a18', 'a18', 'a18-e13', 'a18']);
		expect(rows.every((x) => x.override_reason.length >= 5)).toBe(true);
		expect(
			(await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM audit_events WHERE protocol_id = :id AND action = 'norm_group_override'", { id }))!.n
		).toBe(5);
		// the history names the groups by what they cover: none covered 14;8;19, then a18-e13 (216–359
		// months = 18;0–29;11, 13–30 years of education)
		const page = await (await lead.get(`/protocols/${id}`)).text();
		expect(page).toContain('Word Harvest: no group covers the age → ages 18;0–29;11, 13–30 years of education');
		expect(page).not.toContain('group a18');
	});

	it('an existing examinee code with another birth date is refused; the same date or none reuses the examinee', async () => {
		const code = uniqueCode('SAME');
		await createViaForm(lead, { ...duties, code, birthDate: '1975-06-30' });
		const other = await lead.action('/protocols/new', await formFields({ code, birthDate: '1975-06-03' }));
		expect(other.body.status).toBe(400);
		expect(other.body.data).toContain(`Examinee ${code} is on record with birth date 1975-06-30, not 1975-06-03`);
		expect(other.body.data).toContain('birthDate');
		expect((await lead.action('/protocols/new', await formFields({ code, birthDate: '1975-06-30' }))).body.type).toBe('redirect');
		expect((await lead.action('/protocols/new', await formFields({ code, birthDate: '' }))).body.type).toBe('redirect');
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM examinees WHERE code = :code', { code }))!.n).toBe(1);
	});

	it('a test date after today is refused at creation', async () => {
		// Two days after today's UTC date is in the future in every time zone (UTC−12 … UTC+14).
		const future = new Date(Date.now() + 2 * 86_400_000).toISOString().slice(0, 10);
		const fields = await formFields({ testDate: future });
		const r = await lead.action('/protocols/new', fields);
		expect(r.body.status).toBe(400);
		expect(r.body.data).toContain(`The test date ${future} is after today`);
		expect(r.body.data).toContain('testDate');
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM examinees WHERE code = :code', { code: fields.code }))!.n).toBe(0);
	});
});

// ------------------------------------------------------------------------------------------------
describe('item 9: an administrator cannot deactivate their own account', () => {
	it('the server refuses with a message and the account stays active', async () => {
		const me = await userId(ACCOUNTS.admin);
		const r = await admin.action('/people?/active', { id: String(me), active: '0' });
		expect(r.body.status).toBe(400);
		expect(r.body.data).toContain('You cannot deactivate your own account.');
		expect((await selectOne<{ active: number }>('SELECT active FROM users WHERE id = :me', { me }))!.active).toBe(1);
		expect((await admin.get('/api/v1/me')).status).toBe(200);
	});
});

// ------------------------------------------------------------------------------------------------
describe('an empty education field is not 0 years (walk-through finding)', () => {
	it('empty or blank: Word Harvest (normed by education) gets no group and the protocol is not created; "0" is taken as 0 years', async () => {
		// Before the fix an empty field was read as 0 years and the protocol was created with the
		// "up to 12 years of education" group; now the examinee's education is unknown, so no group fits
		for (const value of ['', '  ']) {
			const fields = await formFields({ educationYears: value });
			const r = await lead.action('/protocols/new', fields);
			expect(r.body.status, JSON.stringify(r.body)).toBe(422);
			expect(r.body.data).toContain(
				'The norm groups of Word Harvest are split by years of education, which is not recorded for this examinee: enter it, or choose a group with a reason.'
			);
			expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM examinees WHERE code = :code', { code: fields.code }))!.n).toBe(0);
		}
		const r = await lead.action('/protocols/new', await formFields({ educationYears: '0' }));
		expect(r.body.type, JSON.stringify(r.body)).toBe('redirect');
		const id = Number(r.body.location!.match(/\/protocols\/(\d+)/)![1]);
		const row = await selectOne<{ education_years: number | null; group_code: string }>(
			`SELECT e.education_years, ng.group_code FROM protocols p JOIN examinees e ON e.id = p.examinee_id
			 JOIN protocol_tests pt ON pt.protocol_id = p.id JOIN norm_groups ng ON ng.id = pt.norm_group_id
			 WHERE p.id = :id AND ng.test_code = 'word-harvest'`,
			{ id }
		);
		// born 1988-05-17, tested 2026-11-20: 38 years, so the 30;0–39;11 band with up to 12 years
		expect(row).toEqual({ education_years: 0, group_code: 'a30-e0' });
	});
});

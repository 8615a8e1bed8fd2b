/**
 * The catalog against the running app and the real MariaDB: API access and validation, test
 * versioning, age-range rejection, all-or-nothing CSV import, export → import round trip, and
 * malformed CSVs that must write nothing.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { signedIn, type Client } from '../helpers/http';
import { closeDb, exec, selectOne, transaction } from '../../src/lib/server/db';

let lead: Client;
let scorer: Client;
const uniq = () => `${Date.now().toString(36)}${Math.floor(Math.random() * 1e6).toString(36)}`;
const count = async (table: string) => Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM ${table}`))!.n);
const snapshot = async () => ({
	tests: await count('tests'),
	groups: await count('norm_groups'),
	sets: await count('norm_sets'),
	domains: await count('domains')
});

beforeAll(async () => {
	lead = await signedIn('lead');
	scorer = await signedIn('scorer');
});
afterAll(() => closeDb());

const newTest = (code: string, over: Record<string, unknown> = {}) => ({
	code,
	name: `Test ${code}`,
	domain: 'memory',
	unit: 'points',
	direction: 'higher_better',
	raw: { min: 0, max: 40, decimals: 0 },
	reported: ['standard', 'percentile'],
	bounds: null,
	reliability: 0.8,
	notes: null,
	...over
});
const post = (c: Client, path: string, json: unknown) => c.request(path, { method: 'POST', json });
const put = (c: Client, path: string, json: unknown) => c.request(path, { method: 'PUT', json });

/** A verified protocol that used the given test version (rows inserted directly). */
async function verifiedProtocolUsing(testId: number, status = 'verified'): Promise<number> {
	const ids = async (email: string) => Number((await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email }))!.id);
	const [a, b, r] = [
		await ids('sam.scorer@demo.crosstally.test'),
		await ids('rae.scorer@demo.crosstally.test'),
		await ids('rita.reviewer@demo.crosstally.test')
	];
	const battery = Number((await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'core-adult'"))!.id);
	const ns = Number((await selectOne<{ id: number }>("SELECT id FROM norm_sets WHERE code = 'harbourview-adult'"))!.id);
	return transaction(async (t) => {
		const ex = await exec("INSERT INTO examinees (code, birth_date) VALUES (:code, '1990-01-01')", { code: `EX-${uniq()}` }, t);
		const p = await exec(
			`INSERT INTO protocols (examinee_id, battery_id, norm_set_id, test_date, age_text, age_months, status, first_scorer_id, second_scorer_id, reviewer_id)
			 VALUES (:ex, :battery, :ns, '2024-05-01', '34;4;0', 412, :status, :a, :b, :r)`,
			{ ex: ex.insertId, battery, ns, status, a, b, r },
			t
		);
		await exec('INSERT INTO protocol_tests (protocol_id, position, test_id) VALUES (:p, 1, :testId)', { p: p.insertId, testId }, t);
		return p.insertId;
	});
}

describe('JSON API access and validation', () => {
	it('lists tests, batteries and norm sets for any signed-in role', async () => {
		const t = await (await scorer.get('/api/v1/tests')).json();
		expect(t.tests.map((x: { code: string }) => x.code)).toEqual(expect.arrayContaining(['speeded-match', 'word-recall']));
		const sm = t.tests.find((x: { code: string }) => x.code === 'speeded-match');
		expect(sm).toMatchObject({
			direction: 'lower_better',
			raw: { min: 0, max: 300, decimals: 1 },
			reported: ['z', 'standard', 'scaled', 't', 'percentile'],
			bounds: { t: [20, 80] }
		});
		const b = await (await scorer.get('/api/v1/batteries')).json();
		const core = b.batteries.find((x: { code: string }) => x.code === 'core-adult');
		expect(core.tests).toBeGreaterThanOrEqual(12);
		const one = await (await scorer.get(`/api/v1/batteries/${core.id}`)).json();
		expect(one.battery.domains.map((d: { code: string }) => d.code)).toEqual([
			'attention',
			'processing-speed',
			'memory',
			'language',
			'visuospatial',
			'executive'
		]);
		const ns = await (await scorer.get('/api/v1/norm-sets')).json();
		const h = ns.normSets.find((x: { code: string }) => x.code === 'harbourview-adult');
		const groups = await (await scorer.get(`/api/v1/norm-sets/${h.id}?test=word-recall`)).json();
		expect(groups.groups.find((g: { group_code: string }) => g.group_code === 'a30')).toMatchObject({
			mean: 24.5,
			sd: 4.2,
			age_min_months: 360,
			age_max_months: 479
		});
		expect(groups.groups.find((g: { group_code: string }) => g.group_code === 'a40')).toMatchObject({ mean: 22.1, sd: 4.6 });
	});
	it('refuses writes from a scorer', async () => {
		expect((await post(scorer, '/api/v1/tests', newTest(`s-${uniq()}`))).status).toBe(403);
		expect((await post(scorer, '/api/v1/catalog/import/confirm', { kind: 'tests', csv: '' })).status).toBe(403);
	});
	it('answers bad input with 4xx and field messages, never 500', async () => {
		const bad = await post(lead, '/api/v1/tests', newTest('Bad Code', { raw: { min: 5, max: 1, decimals: 9 }, reported: [] }));
		expect(bad.status).toBe(400);
		const body = await bad.json();
		expect(Object.keys(body.fields)).toEqual(expect.arrayContaining(['code', 'raw.decimals', 'reported']));
		const notJson = await lead.request('/api/v1/tests', { method: 'POST', body: '{nope', headers: { 'content-type': 'application/json' } });
		expect(notJson.status).toBe(400);
		expect((await post(lead, '/api/v1/tests', [1, 2])).status).toBe(400);
		expect((await post(lead, '/api/v1/tests', newTest(`u-${uniq()}`, { domain: 'no-such-domain' }))).status).toBe(400);
		expect((await lead.get('/api/v1/tests/no-such-test')).status).toBe(404);
		expect((await lead.get('/api/v1/norm-sets/abc')).status).toBe(404);
		expect((await post(lead, '/api/v1/catalog/import/preview', { kind: 'x', csv: 1 })).status).toBe(400);
		const dup = await post(lead, '/api/v1/tests', newTest('speeded-match'));
		expect(dup.status).toBe(409);
	});
});

describe('test versioning', () => {
	it('updates in place while no verified protocol uses the version', async () => {
		const code = `v-${uniq()}`;
		expect((await post(lead, '/api/v1/tests', newTest(code))).status).toBe(201);
		const draftOf = Number((await selectOne<{ id: number }>('SELECT id FROM tests WHERE code = :code', { code }))!.id);
		await verifiedProtocolUsing(draftOf, 'in_review');
		const r = await (await put(lead, `/api/v1/tests/${code}`, newTest(code, { direction: 'lower_better' }))).json();
		expect(r.outcome).toBe('updated');
		expect(r.test).toMatchObject({ id: draftOf, version: 1, direction: 'lower_better' });
	});
	it('makes a new version for a score-altering change once a verified protocol used it; the protocol keeps the old one', async () => {
		const code = `v-${uniq()}`;
		const created = await (await post(lead, '/api/v1/tests', newTest(code))).json();
		const v1 = created.test.id;
		const protocol = await verifiedProtocolUsing(v1);

		const renamed = await (await put(lead, `/api/v1/tests/${code}`, newTest(code, { name: 'Renamed', notes: 'a note' }))).json();
		expect(renamed.outcome).toBe('updated');
		expect(renamed.test).toMatchObject({ id: v1, version: 1, name: 'Renamed' });

		for (const [change, body] of [
			['direction', { direction: 'lower_better' }],
			['raw range', { raw: { min: 0, max: 50, decimals: 0 } }],
			['reported scores', { reported: ['t'] }],
			['bounds', { bounds: { t: [25, 75] } }],
			['reliability', { reliability: 0.9 }]
		] as const) {
			const before = await (await lead.get(`/api/v1/tests/${code}`)).json();
			await verifiedProtocolUsing(before.test.id);
			const r = await (await put(lead, `/api/v1/tests/${code}`, { ...before.test, ...body })).json();
			expect(r.outcome, change).toBe('version');
			expect(r.changed).toContain(change);
			expect(r.test.version).toBe(before.test.version + 1);
		}
		const all = await (await lead.get(`/api/v1/tests/${code}`)).json();
		expect(all.versions.map((v: { version: number }) => v.version)).toEqual([6, 5, 4, 3, 2, 1]);
		expect(all.versions.filter((v: { is_current: boolean }) => v.is_current)).toHaveLength(1);
		const old = await selectOne<{ test_id: number; direction: string; name: string }>(
			'SELECT pt.test_id, t.direction, t.name FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = :protocol',
			{ protocol }
		);
		expect(old).toEqual({ test_id: v1, direction: 'higher_better', name: 'Renamed' });
		const same = await (await put(lead, `/api/v1/tests/${code}`, all.test)).json();
		expect(same.outcome).toBe('unchanged');
		expect((await put(lead, `/api/v1/tests/${code}`, { ...all.test, code: 'other-code' })).status).toBe(400);
	});
});

describe('norm groups: overlapping or gapped age ranges are refused with the rows named', () => {
	let setId: number;
	beforeAll(async () => {
		const r = await post(lead, '/api/v1/norm-sets', { code: `ns-${uniq()}`, name: 'Overlap checks', source: 'Invented for a test', version: '1' });
		expect(r.status).toBe(201);
		setId = (await r.json()).normSet.id;
	});
	const g = (group: string, min: number, max: number, extra = {}) => ({
		test_code: 'word-recall',
		group_code: group,
		age_min_months: min,
		age_max_months: max,
		mean: 20,
		sd: 4,
		...extra
	});

	it('accepts contiguous bands and refuses an overlap, naming both', async () => {
		expect((await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [g('a18', 216, 359), g('a30', 360, 479)] })).status).toBe(200);
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [g('a18', 216, 359), g('a30', 350, 479)] });
		expect(r.status).toBe(422);
		const body = await r.json();
		expect(body.message).toMatch(/overlap for word-recall.*a18.*216–359.*a30.*350–479/);
		const kept = await (await lead.get(`/api/v1/norm-sets/${setId}`)).json();
		expect(kept.groups.map((x: { group_code: string; age_min_months: number }) => [x.group_code, x.age_min_months])).toEqual([
			['a18', 216],
			['a30', 360]
		]);
	});
	it('refuses a gap', async () => {
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [g('a18', 216, 359), g('a40', 480, 599)] });
		expect(r.status).toBe(422);
		expect((await r.json()).message).toMatch(/gap for word-recall: nothing covers 360–479 months/);
	});
	it('checks each set of keys apart (education bands side by side are fine)', async () => {
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			groups: [g('lo', 216, 479, { edu_min: 0, edu_max: 12 }), g('hi', 216, 479, { edu_min: 13, edu_max: 30 })]
		});
		expect(r.status).toBe(200);
	});
	it('refuses a hand-added group that would overlap (the form action)', async () => {
		const a = await lead.action(`/catalog/norm-sets/${setId}?/group`, {
			test_code: 'speeded-match',
			group_code: 'x1',
			age_min_months: '216',
			age_max_months: '359',
			mean: '40',
			sd: '6'
		});
		expect(a.body.type).toBe('success');
		const b = await lead.action(`/catalog/norm-sets/${setId}?/group`, {
			test_code: 'speeded-match',
			group_code: 'x2',
			age_min_months: '300',
			age_max_months: '400',
			mean: '40',
			sd: '6'
		});
		expect(b.body.type).toBe('failure');
		expect(b.body.data).toMatch(/overlap for speeded-match/);
		const n = await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM norm_groups WHERE norm_set_id = :setId AND test_code = 'speeded-match'", { setId });
		expect(Number(n!.n)).toBe(1);
	});
});

const NH = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,mean,sd,n';
const newSet = () => ({ mode: 'new', set: { code: `imp-${uniq()}`, name: 'Imported', source: 'Invented for a test', version: '1' } });

describe('CSV import: preview writes nothing, confirm is all or nothing', () => {
	it('previews with row messages and writes nothing', async () => {
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/preview', {
			kind: 'norms',
			csv: `${NH}\nword-recall,a18,216,359,,,,25,4,\nword-recall,a30,360,479,,,,24,0,\n`
		});
		const body = await r.json();
		expect(body.ok).toBe(false);
		expect(body.preview.errors).toEqual([{ line: 3, column: 'sd', message: 'sd: 0 — SD must be above 0' }]);
		expect(await snapshot()).toEqual(before);
	});
	it('refuses a file with one bad row among 2,000 good ones, writing nothing (not even the new norm set)', async () => {
		// 2,000 groups with distinct keys: education years and sex, one band each.
		const lines = Array.from(
			{ length: 2000 },
			(_, i) =>
				`${i % 2 ? 'word-recall' : 'speeded-match'},g${i},${Math.floor(i / 82) * 12},${Math.floor(i / 82) * 12 + 11},${['', 'F'][Math.floor(i / 41) % 2]},${i % 41},${i % 41},25,4,10`
		);
		lines[1500] = lines[1500].replace(',25,4,10', ',25,abc,10');
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv: [NH, ...lines].join('\n'), target: newSet() });
		expect(r.status).toBe(422);
		const body = await r.json();
		expect(body.preview.errors).toEqual([expect.objectContaining({ line: 1502, column: 'sd' })]);
		expect(await snapshot()).toEqual(before);
		lines[1500] = lines[1500].replace(',25,abc,10', ',25,4,10');
		const ok = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv: [NH, ...lines].join('\n'), target: newSet() });
		expect(ok.status).toBe(200);
		expect((await ok.json()).imported).toMatchObject({ rows: 2000, created: 2000 });
		expect(await count('norm_groups')).toBe(before.groups + 2000);
	});
	it('rolls back the whole import when a write fails part-way (groups a protocol used cannot be replaced)', async () => {
		const set = await (await post(lead, '/api/v1/norm-sets', { code: `used-${uniq()}`, name: 'Used', source: 'Invented', version: '1' })).json();
		const id = set.normSet.id;
		await put(lead, `/api/v1/norm-sets/${id}`, {
			groups: [{ test_code: 'word-recall', group_code: 'a', age_min_months: 0, age_max_months: 1000, mean: 1, sd: 1 }]
		});
		const group = await selectOne<{ id: number }>('SELECT id FROM norm_groups WHERE norm_set_id = :id', { id });
		const protocol = await verifiedProtocolUsing(
			Number((await selectOne<{ id: number }>("SELECT id FROM tests WHERE code = 'word-recall' AND is_current = 1"))!.id)
		);
		await exec('UPDATE protocol_tests SET norm_group_id = :g WHERE protocol_id = :protocol', { g: group!.id, protocol });
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/confirm', {
			kind: 'norms',
			csv: `${NH}\nword-recall,b,0,1000,,,,2,2,\n`,
			target: { mode: 'existing', id }
		});
		expect(r.status).toBe(409);
		expect(await snapshot()).toEqual(before);
	});
	it('imports a test list in one go: new tests, in-place changes and new versions', async () => {
		const a = `t-${uniq()}`;
		const b = `t-${uniq()}`;
		const TH = 'code,name,domain,unit,direction,raw_min,raw_max,raw_decimals,reported,bounds,reliability,notes';
		const csv1 = `${TH}\n${a},Alpha,memory,points,higher_better,0,20,0,scaled percentile,,0.8,\n${b},Beta,executive,errors,lower_better,0,60,0,t,t=25..75,,"two\nlines"\n`;
		const r1 = await (await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tests', csv: csv1 })).json();
		expect(r1.imported).toMatchObject({ rows: 2, created: 2 });
		const bId = (await (await lead.get(`/api/v1/tests/${b}`)).json()).test.id;
		await verifiedProtocolUsing(bId);
		const csv2 = `${TH}\n${a},Alpha renamed,memory,points,higher_better,0,20,0,scaled percentile,,0.8,\n${b},Beta,executive,errors,lower_better,0,64,0,t,t=25..75,,"two\nlines"\n`;
		const r2 = await (await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tests', csv: csv2 })).json();
		expect(r2.imported).toMatchObject({ rows: 2, created: 0, updated: 1, versioned: 1 });
		expect((await (await lead.get(`/api/v1/tests/${b}`)).json()).test).toMatchObject({ version: 2, raw: { max: 64 }, notes: 'two\nlines' });
	});
});

describe('export → import round trip', () => {
	it('gives the same norm groups', async () => {
		const h = await selectOne<{ id: number }>("SELECT id FROM norm_sets WHERE code = 'harbourview-adult'");
		const res = await lead.get(`/catalog/export/norms?set=${h!.id}`);
		expect(res.headers.get('content-type')).toMatch(/text\/csv/);
		const csv = await res.text();
		expect(csv.split('\r\n')[0]).toBe(NH);
		expect(csv.split('\r\n').length).toBeGreaterThan(80);
		const imported = await (await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv, target: newSet() })).json();
		const again = await (await lead.get(`/catalog/export/norms?set=${imported.imported.normSetId}`)).text();
		expect(again).toBe(csv);
	});
	it('gives the same tests (importing the export changes nothing)', async () => {
		const csv = await (await lead.get('/catalog/export/tests')).text();
		const before = await snapshot();
		const r = await (await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tests', csv })).json();
		expect(r.imported.unchanged).toBe(r.imported.rows);
		expect(await snapshot()).toEqual(before);
		expect(await (await lead.get('/catalog/export/tests')).text()).toBe(csv);
	});
});

describe('malformed CSVs get messages and write nothing', () => {
	const good = `${NH}\nword-recall,a18,216,359,,,,25,4,\nword-recall,a30,360,479,,,,24,4,\n`;
	const cases: [string, string, RegExp][] = [
		['wrong delimiter', good.replace(/,/g, ';'), /semicolons/],
		['tab delimiter', good.replace(/,/g, '\t'), /tabs/],
		['quoted newline inside a code', `${NH}\nword-recall,"a\n18",216,359,,,,25,4,\n`, /line 2: group_code/],
		['empty file', '', /empty/],
		['header only', `${NH}\n`, /no rows/],
		['formula cell', `${NH}\nword-recall,a18,216,359,,,,=HYPERLINK("x"),4,\n`, /formula/],
		['unclosed quote', `${NH}\nword-recall,"a18,216,359,,,,25,4,\n`, /./],
		['BOM and a bad row', `\uFEFF${NH}\nword-recall,a18,216,359,,,,25,4,\nword-recall,a30,360,470,,,,24,4,\nword-recall,a40,480,599,,,,22,4,\n`, /gap/]
	];
	it.each(cases)('%s', async (_name, csv, re) => {
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv, target: newSet() });
		expect(r.status).toBe(422);
		const body = await r.json();
		expect(body.message).toMatch(re);
		expect(body.preview.fileErrors.length + body.preview.errors.length).toBeGreaterThan(0);
		expect(await snapshot()).toEqual(before);
	});
	it('10 MB of garbage', async () => {
		let seed = 7;
		const chars: string[] = [];
		for (let i = 0; i < 10 * 1024 * 1024; i++) {
			seed = (seed * 1103515245 + 12345) & 0x7fffffff;
			chars.push(String.fromCharCode(32 + (seed % 95)));
			if (seed % 61 === 0) chars.push('\n');
		}
		const before = await snapshot();
		const t0 = Date.now();
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv: chars.join(''), target: newSet() });
		expect(r.status).toBe(422);
		expect((await r.json()).preview.fileErrors[0]).toMatch(/not a header Crosstally knows|binary|Missing column/);
		expect(Date.now() - t0).toBeLessThan(15_000);
		expect(await snapshot()).toEqual(before);
	});
	it('a file over the size limit', async () => {
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'norms', csv: good + 'x'.repeat(17 * 1024 * 1024), target: newSet() });
		expect([413, 422]).toContain(r.status);
		expect(await snapshot()).toEqual(before);
	});
	it('a BOM on a good file is fine', async () => {
		const r = await post(lead, '/api/v1/catalog/import/preview', { kind: 'norms', csv: '\uFEFF' + good.replace(/\n/g, '\r\n') });
		expect((await r.json()).ok).toBe(true);
	});
});

/**
 * Norms in the forms manuals give them (issue 14), through the catalog API against the real
 * MariaDB: conversion tables (coverage checked and named by row), regression equations,
 * percentile-only tables with bands, battery composites with their own norms, and the CSV
 * import/export of tables and equations (row-level errors, all or nothing, round trip).
 *
 * The tables are the invented worked examples of shared/spec/reconcile.md ("tile-build" group
 * a30; "category-naming"; composite "memory-index"); every expected coverage message is worked out
 * by hand from the rows written beside it.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { signedIn, type Client } from '../helpers/http';
import { closeDb, exec, selectOne, transaction } from '../../src/lib/server/db';

let lead: Client;
const uniq = () => `${Date.now().toString(36)}${Math.floor(Math.random() * 1e6).toString(36)}`;
const count = async (table: string) => Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM ${table}`))!.n);
const snapshot = async () => ({
	groups: await count('norm_groups'),
	rows: await count('norm_table_rows'),
	sets: await count('norm_sets'),
	composites: await count('composites')
});
const post = (c: Client, path: string, json: unknown) => c.request(path, { method: 'POST', json });
const put = (c: Client, path: string, json: unknown) => c.request(path, { method: 'PUT', json });

// Codes of this run (the test database lives for one `npm test`, but a file may run twice).
const run = uniq().slice(-6);
const TILE = `tile-${run}`; // raw 0–20 whole numbers, reports scaled and percentile (reconcile.md's tile-build)
const WORDS = `words-${run}`; // raw 0–36, reports scaled (a part of the composite)
const NAMING = `naming-${run}`; // raw 0–80, regression-normed (reconcile.md's category-naming)
const SLIPS = `slips-${run}`; // error count 0–30, percentile only
const INDEX = `memidx-${run}`; // composite of WORDS and TILE on scaled

const newTest = (code: string, over: Record<string, unknown>) => ({
	code,
	name: `Test ${code}`,
	domain: 'memory',
	unit: 'points',
	direction: 'higher_better',
	raw: { min: 0, max: 20, decimals: 0 },
	reported: ['scaled', 'percentile'],
	bounds: null,
	reliability: 0.8,
	notes: null,
	...over
});

/** reconcile.md, tile-build group a30: 0–4 → 3, 5–6 → 4, 7 → 5, … 16 → 14, 17–18 → 15, 19–20 → 17. */
const TILE_A30: [number, number, number][] = [
	[0, 4, 3],
	[5, 6, 4],
	[7, 7, 5],
	[8, 8, 6],
	[9, 9, 7],
	[10, 10, 8],
	[11, 11, 9],
	[12, 12, 10],
	[13, 13, 11],
	[14, 14, 12],
	[15, 15, 13],
	[16, 16, 14],
	[17, 18, 15],
	[19, 20, 17]
];
const rowsOf = (t: [number, number, number][]) => t.map(([lo, hi, score]) => ({ lo, hi, score, percentile: null }));
const group = (test: string, code: string, min: number, max: number, extra: Record<string, unknown>) => ({
	test_code: test,
	group_code: code,
	age_min_months: min,
	age_max_months: max,
	...extra
});

let setId: number;
let batteryId: number;

beforeAll(async () => {
	lead = await signedIn('lead');
	for (const t of [
		newTest(TILE, {}),
		newTest(WORDS, { raw: { min: 0, max: 36, decimals: 0 }, reported: ['scaled'] }),
		newTest(NAMING, { raw: { min: 0, max: 80, decimals: 0 }, reported: ['z', 'standard', 't', 'percentile'], domain: 'language' }),
		newTest(SLIPS, { raw: { min: 0, max: 30, decimals: 0 }, reported: ['percentile'], direction: 'lower_better', unit: 'errors', domain: 'attention' })
	]) {
		const r = await post(lead, '/api/v1/tests', t);
		expect(r.status, await r.clone().text()).toBe(201);
	}
	const s = await post(lead, '/api/v1/norm-sets', {
		code: `forms-${run}`,
		name: 'Forms',
		source: 'Invented for a test',
		version: '1',
		covariate_age: 'whole_years'
	});
	expect(s.status).toBe(201);
	setId = (await s.json()).normSet.id;
});
afterAll(() => closeDb());

describe('conversion tables', () => {
	it('stores the tile-build a30 table and gives it back row by row', async () => {
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows: rowsOf(TILE_A30) })]
		});
		expect(r.status, await r.clone().text()).toBe(200);
		const back = await (await lead.get(`/api/v1/norm-sets/${setId}?test=${TILE}`)).json();
		expect(back.groups).toHaveLength(1);
		expect(back.groups[0]).toMatchObject({ form: 'table', scale: 'scaled', mean: null, sd: null, subject: 'test' });
		expect(back.groups[0].rows).toEqual(rowsOf(TILE_A30));
		expect(await count(`norm_table_rows WHERE norm_group_id = ${back.groups[0].id}`)).toBe(14);
	});

	it('refuses a gap, an overlap and a score off the scale, naming each row, and writes nothing', async () => {
		const before = await snapshot();
		const rows = rowsOf(TILE_A30);
		rows[1] = { lo: 6, hi: 6, score: 4, percentile: null }; // row 2 starts at 6: raw 5 is covered by no row
		rows[4] = { lo: 8, hi: 9, score: 7, percentile: null }; // row 5 (9 in the manual) also takes 8, which row 4 holds
		rows[13] = { lo: 19, hi: 20, score: 20, percentile: null }; // scaled 20 is above the scale's 19
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows })] });
		expect(r.status).toBe(422);
		const body = await r.json();
		expect(body.problems).toEqual([
			`groups[0] (${TILE} a30), row 2: gap — nothing covers raw 5–5 between rows 1 and 2.`,
			`groups[0] (${TILE} a30), row 5: overlap — raw 8–8 is also in row 4.`,
			`groups[0] (${TILE} a30), row 14: score 20 is outside the scaled scale's 1–19.`
		]);
		expect(await snapshot()).toEqual(before);
	});

	it("a PUT of the set's details with a bad group changes nothing: the name, source and age rule stay as they were (one transaction)", async () => {
		const before = await (await lead.get(`/api/v1/norm-sets/${setId}`)).json();
		const groupsBefore = await snapshot();
		// the details are valid on their own; the group's table stops at raw 18 while the test's maximum is 20
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			name: 'Renamed in the same request',
			source: 'Changed source',
			borrow_days: 'actual',
			groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows: rowsOf(TILE_A30).slice(0, 13) })]
		});
		expect(r.status).toBe(422);
		const after = await (await lead.get(`/api/v1/norm-sets/${setId}`)).json();
		expect(after.normSet.name).toBe('Forms');
		expect(after.normSet.source).toBe('Invented for a test');
		expect(after.normSet.age_rule).toEqual(before.normSet.age_rule);
		expect(after.normSet.age_rule.borrowDays).toBe(30);
		expect(await snapshot()).toEqual(groupsBefore);
		// the same details without the bad group are taken (so the refusal above was the group's)
		const ok = await put(lead, `/api/v1/norm-sets/${setId}`, { source: 'Invented for a test (checked)' });
		expect(ok.status, await ok.clone().text()).toBe(200);
		expect((await ok.json()).normSet.source).toBe('Invented for a test (checked)');
		expect((await put(lead, `/api/v1/norm-sets/${setId}`, { source: 'Invented for a test' })).status).toBe(200);
	});

	it('refuses a table that stops short of the raw maximum, and one with percentiles on some rows only', async () => {
		const short = rowsOf(TILE_A30).slice(0, 13); // ends at 18; the test's raw maximum is 20
		let r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows: short })] });
		expect(r.status).toBe(422);
		expect((await r.json()).problems).toEqual([`groups[0] (${TILE} a30), row 13: gap — nothing covers raw 19–20 after the last row.`]);
		const mixed = rowsOf(TILE_A30).map((x, i) => (i === 0 ? { ...x, percentile: '1' } : x));
		r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows: mixed })] });
		expect(r.status).toBe(422);
		expect((await r.json()).problems).toEqual([`groups[0] (${TILE} a30), row 2: give a percentile on every row or on none (1 of 14 rows have one).`]);
	});

	it('takes a percentile-only table with bands for an error count that reports the percentile alone, and refuses it for a test that reports more', async () => {
		const bands = [
			{ lo: 0, hi: 1, score: null, percentile: '>=75' },
			{ lo: 2, hi: 3, score: null, percentile: '26–74' }, // en dash as printed; stored as typed
			{ lo: 4, hi: 6, score: null, percentile: '10-25' },
			{ lo: 7, hi: 30, score: null, percentile: '≤9' }
		];
		let r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(SLIPS, 'all', 0, 1500, { form: 'table', scale: 'percentile', rows: bands })] });
		expect(r.status, await r.clone().text()).toBe(200);
		const back = await (await lead.get(`/api/v1/norm-sets/${setId}?test=${SLIPS}`)).json();
		expect(back.groups[0].rows.map((x: { percentile: string }) => x.percentile)).toEqual(['>=75', '26–74', '10-25', '≤9']);
		r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			groups: [group(TILE, 'b', 0, 359, { form: 'table', scale: 'percentile', rows: [{ lo: 0, hi: 20, score: null, percentile: '50' }] })]
		});
		expect(r.status).toBe(422);
		expect((await r.json()).message).toContain(
			`a percentile-only table fits only a test that reports the percentile alone (${TILE} reports scaled, percentile)`
		);
		// a band is no value of a score table's percentile column
		const banded = rowsOf(TILE_A30).map((x) => ({ ...x, percentile: '5-9' }));
		r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(TILE, 'a30', 360, 479, { form: 'table', scale: 'scaled', rows: banded })] });
		expect(r.status).toBe(422);
		expect((await r.json()).problems[0]).toBe(`groups[0] (${TILE} a30), row 1: percentile band "5-9" is allowed only in a percentile-only table.`);
	});
});

describe('regression equations', () => {
	it('stores category-naming: intercept 30.0, age −0.15, education 1.2, residual SD 8.0', async () => {
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			groups: [group(NAMING, 'all', 216, 1079, { form: 'regression', intercept: 30, coefficients: { age: -0.15, education: 1.2 }, sd: 8 })]
		});
		expect(r.status, await r.clone().text()).toBe(200);
		const back = await (await lead.get(`/api/v1/norm-sets/${setId}?test=${NAMING}`)).json();
		expect(back.groups[0]).toMatchObject({ form: 'regression', intercept: 30, coefficients: { age: -0.15, education: 1.2 }, sd: 8, mean: null, rows: null });
	});
	it('refuses an equation with no intercept, a covariate off the list, or no coefficient', async () => {
		const before = await snapshot();
		for (const [extra, field] of [
			[{ coefficients: { age: -0.15 }, sd: 8 }, 'groups.0.intercept'],
			[{ intercept: 30, coefficients: { age: -0.15, handedness: 2 }, sd: 8 }, 'groups.0.coefficients'],
			[{ intercept: 30, coefficients: {}, sd: 8 }, 'groups.0.coefficients']
		] as const) {
			const r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(NAMING, 'all', 216, 1079, { form: 'regression', ...extra })] });
			expect(r.status).toBe(400);
			expect(Object.keys((await r.json()).fields)).toContain(field);
		}
		expect(await snapshot()).toEqual(before);
	});
});

describe('battery composites and their norms', () => {
	it('defines a composite over two parts on the scaled score; refuses a code a test has, a part outside the battery, a part that does not report the field', async () => {
		const base = { code: `bat-${run}`, name: 'Forms battery', description: '', norm_set_id: setId, tests: [WORDS, TILE, NAMING, SLIPS] };
		const composite = {
			code: INDEX,
			name: 'Memory index',
			parts: [WORDS, TILE],
			part_field: 'scaled',
			reported: ['standard', 'sum', 'percentile'],
			reliability: 0.9
		};
		for (const [c, status, message] of [
			[{ ...composite, code: TILE }, 400, `Composite ${TILE}: a test has this code; composites and tests need different codes.`],
			[{ ...composite, parts: [WORDS, 'speeded-match'] }, 400, `Composite ${INDEX}: part speeded-match is not a test of this battery.`],
			[{ ...composite, parts: [WORDS, SLIPS] }, 400, `Composite ${INDEX}: part ${SLIPS} does not report the scaled score the composite sums.`]
		] as const) {
			const r = await post(lead, '/api/v1/batteries', { ...base, composites: [c] });
			expect(r.status).toBe(status);
			expect((await r.json()).message).toBe(message);
		}
		const r = await post(lead, '/api/v1/batteries', { ...base, composites: [composite] });
		expect(r.status, await r.clone().text()).toBe(201);
		const b = (await r.json()).battery;
		batteryId = b.id;
		// reported fields kept in field order: sum first
		expect(b.composites).toEqual([
			expect.objectContaining({
				code: INDEX,
				parts: [WORDS, TILE],
				part_field: 'scaled',
				reported: ['sum', 'standard', 'percentile'],
				reliability: 0.9,
				position: 1
			})
		]);
		// an update without `composites` keeps them
		const u = await put(lead, `/api/v1/batteries/${batteryId}`, { ...base, name: 'Forms battery, renamed' });
		expect((await u.json()).battery.composites).toHaveLength(1);
	});

	it('normes the composite by mean/SD of the sum (memory-index a30: 20, 5.2)', async () => {
		const r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(INDEX, 'a30', 360, 479, { mean: 20, sd: 5.2 })] });
		expect(r.status, await r.clone().text()).toBe(200);
		const back = await (await lead.get(`/api/v1/norm-sets/${setId}?test=${INDEX}`)).json();
		expect(back.groups[0]).toMatchObject({ subject: 'composite', form: 'mean_sd', mean: 20, sd: 5.2 });
	});

	it('checks a sum table against every possible sum: two scaled parts of 1–19 give sums 2–38', async () => {
		// 2–38 is 1 + 1 to 19 + 19 (reconcile.md, Composites: from the sum of the parts' lower bounds to the sum of their upper bounds)
		const ok = [
			{ lo: 2, hi: 10, score: 60 },
			{ lo: 11, hi: 20, score: 85 },
			{ lo: 21, hi: 30, score: 110 },
			{ lo: 31, hi: 38, score: 140 }
		].map((x) => ({ ...x, percentile: null }));
		let r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(INDEX, 'a40', 480, 599, { form: 'table', scale: 'standard', rows: ok })] });
		expect(r.status, await r.clone().text()).toBe(200);
		const short = ok.map((x, i) => (i === 0 ? { ...x, lo: 3 } : x));
		r = await put(lead, `/api/v1/norm-sets/${setId}`, { groups: [group(INDEX, 'a40', 480, 599, { form: 'table', scale: 'standard', rows: short })] });
		expect(r.status).toBe(422);
		expect((await r.json()).problems).toEqual([`groups[0] (${INDEX} a40), row 1: gap — nothing covers sum 2–2 before this row.`]);
		r = await put(lead, `/api/v1/norm-sets/${setId}`, {
			groups: [group(INDEX, 'a40', 480, 599, { form: 'regression', intercept: 1, coefficients: { age: 1 }, sd: 1 })]
		});
		expect(r.status).toBe(422);
		expect((await r.json()).problems).toEqual([`groups[0] (${INDEX} a40): a composite is normed by mean/SD of its sum or by a sum table`]);
	});
});

const TH = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,scale,raw_lo,raw_hi,score,percentile';
const EH = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,intercept,b_age,b_education,b_sex,residual_sd,n';
const newSet = () => ({ mode: 'new', set: { code: `imp-${uniq()}`, name: 'Imported tables', source: 'Invented for a test', version: '1' } });
const tableLines = (test: string, g: string, min: number, max: number, t: [number, number, number][]) =>
	t.map(([lo, hi, s]) => `${test},${g},${min},${max},,,,scaled,${lo},${hi},${s},`);

describe('CSV import and export of tables and equations', () => {
	it('previews a tables file with row-level errors on the lines of the rows, and a confirm of it writes nothing', async () => {
		const lines = [...tableLines(TILE, 'a30', 360, 479, TILE_A30), ...tableLines(TILE, 'a40', 480, 599, TILE_A30)];
		lines[3] = lines[3].replace(',8,8,6,', ',8,8,x,'); // line 5 (header is line 1): score "x"
		// a40's rows are lines 16–29; its fifth row (line 20, raw 9 → 7) now reads 9–10, so its sixth (line 21, raw 10) overlaps it
		lines[18] = lines[18].replace(',9,9,7,', ',9,10,7,');
		const csv = [TH, ...lines].join('\n');
		const pre = await (await post(lead, '/api/v1/catalog/import/preview', { kind: 'tables', csv })).json();
		expect(pre.ok).toBe(false);
		expect(pre.preview.errors).toEqual([
			// the a30 table with a bad row is not checked for coverage (its missing row would read as a gap)
			{ line: 5, column: 'score', message: 'score: "x" is not a number' },
			{ line: 21, column: 'raw_lo', message: `${TILE} a40, table row 6: overlap — raw 10–10 is also in row 5.` }
		]);
		const before = await snapshot();
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tables', csv, target: newSet() });
		expect(r.status).toBe(422);
		expect(await snapshot()).toEqual(before);
	});

	it('imports tables, equations and a sum table into a new norm set, and exports them back unchanged', async () => {
		const tables =
			[
				TH,
				...tableLines(TILE, 'a30', 360, 479, TILE_A30),
				`${INDEX},a30,360,479,,,,standard,2,19,85,16`,
				`${INDEX},a30,360,479,,,,standard,20,38,115,84`,
				`${SLIPS},all,0,1500,,,,percentile,0,2,,>=50`,
				`${SLIPS},all,0,1500,,,,percentile,3,30,,<=49`
			].join('\r\n') + '\r\n';
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tables', csv: tables, target: newSet() });
		expect(r.status, await r.clone().text()).toBe(200);
		const out = (await r.json()).imported;
		// 14 + 2 + 2 table rows in 3 tables
		expect(out).toMatchObject({ kind: 'tables', rows: 18, created: 3 });
		const eq = `${EH}\r\n${NAMING},all,216,1079,,,,30,-0.15,1.2,,8,412\r\n`;
		const r2 = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'equations', csv: eq, target: { mode: 'existing', id: out.normSetId } });
		expect(r2.status, await r2.clone().text()).toBe(200);
		expect((await r2.json()).imported).toMatchObject({ rows: 1, created: 1 });
		const back = await (await lead.get(`/api/v1/norm-sets/${out.normSetId}?test=${NAMING}`)).json();
		expect(back.groups[0]).toMatchObject({ form: 'regression', intercept: 30, coefficients: { age: -0.15, education: 1.2 }, sd: 8, n: 412 });
		const exportedTables = await (await lead.get(`/catalog/export/tables?set=${out.normSetId}`)).text();
		const exportedEq = await (await lead.get(`/catalog/export/equations?set=${out.normSetId}`)).text();
		expect(exportedEq).toBe(eq);
		// Same lines, in the catalog's order (tests by domain, then composites): compare as sets of lines.
		expect(exportedTables.split('\r\n').sort()).toEqual(tables.split('\r\n').sort());
	});

	it('refuses an equations file naming the bad line, and a tables file whose group keys change between rows', async () => {
		const eq = `${EH}\n${NAMING},all,216,1079,,,,30,-0.15,1.2,,0,\n`;
		const pre = await (await post(lead, '/api/v1/catalog/import/preview', { kind: 'equations', csv: eq })).json();
		expect(pre.preview.errors).toEqual([{ line: 2, column: 'residual_sd', message: 'residual_sd: 0 — must be above 0' }]);
		const lines = tableLines(TILE, 'a30', 360, 479, TILE_A30);
		lines[5] = lines[5].replace(`${TILE},a30,360,479`, `${TILE},a30,360,480`);
		const pre2 = await (await post(lead, '/api/v1/catalog/import/preview', { kind: 'tables', csv: [TH, ...lines].join('\n') })).json();
		expect(pre2.preview.errors[0]).toEqual({
			line: 7,
			column: 'age_min_months',
			message: `Group a30 of ${TILE} has other ages, keys or scale here than on line 2; every row of one table repeats the same group columns`
		});
	});

	it('rolls back a tables import into a set whose group a protocol used (409), leaving every row as it was', async () => {
		const s = await (await post(lead, '/api/v1/norm-sets', { code: `used-${uniq()}`, name: 'Used', source: 'Invented', version: '1' })).json();
		const id = s.normSet.id;
		expect(
			(await put(lead, `/api/v1/norm-sets/${id}`, { groups: [group(TILE, 'a30', 0, 1000, { form: 'table', scale: 'scaled', rows: rowsOf(TILE_A30) })] })).status
		).toBe(200);
		const g = await selectOne<{ id: number }>('SELECT id FROM norm_groups WHERE norm_set_id = :id', { id });
		await transaction(async (t) => {
			const uid = async (email: string) => Number((await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email }, t))!.id);
			const ex = await exec("INSERT INTO examinees (code, birth_date) VALUES (:code, '1990-01-01')", { code: `EX-${uniq()}` }, t);
			const p = await exec(
				`INSERT INTO protocols (examinee_id, battery_id, norm_set_id, test_date, age_text, age_months, status, first_scorer_id, second_scorer_id, reviewer_id)
				 VALUES (:ex, :b, :ns, '2024-05-01', '34;4;0', 412, 'verified', :a, :c, :r)`,
				{
					ex: ex.insertId,
					b: batteryId,
					ns: id,
					a: await uid('sam.scorer@demo.crosstally.test'),
					c: await uid('rae.scorer@demo.crosstally.test'),
					r: await uid('rita.reviewer@demo.crosstally.test')
				},
				t
			);
			const test = await selectOne<{ id: number }>('SELECT id FROM tests WHERE code = :c AND is_current = 1', { c: TILE }, t);
			await exec(
				'INSERT INTO protocol_tests (protocol_id, position, test_id, norm_group_id) VALUES (:p, 1, :test, :g)',
				{ p: p.insertId, test: test!.id, g: g!.id },
				t
			);
		});
		const before = await snapshot();
		const csv = [
			TH,
			...tableLines(
				TILE,
				'a30',
				0,
				1000,
				TILE_A30.map(([lo, hi, sc]) => [lo, hi, Math.min(19, sc + 1)] as [number, number, number])
			)
		].join('\n');
		const r = await post(lead, '/api/v1/catalog/import/confirm', { kind: 'tables', csv, target: { mode: 'existing', id } });
		expect(r.status).toBe(409);
		expect(await snapshot()).toEqual(before);
		const back = await (await lead.get(`/api/v1/norm-sets/${id}`)).json();
		expect(back.groups[0].rows).toEqual(rowsOf(TILE_A30));
	});
});

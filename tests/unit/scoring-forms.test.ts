/**
 * Issue 14: norm forms (mean/SD, regression, table incl. percentile-only with bands) and composites,
 * exactly as shared/spec/reconcile.md says. Worked examples go through the batch command's `run`.
 * Every expected value is worked out by hand in the comments. Φ values are read from a standard
 * normal table (NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.1, "Cumulative distribution
 * function of the standard normal distribution"), interpolated linearly between its two-decimal rows.
 * Tables, equations and test names are invented.
 */
import { describe, expect, it } from 'vitest';
import { PassThrough, Readable } from 'node:stream';
import { run } from '../../scripts/cli/reconcile';
import {
	checkCompositeSum,
	checkField,
	reconcile,
	testReferences,
	compositeReferences,
	type Discrepancy,
	type FieldValues,
	type ReconcileInput,
	type TestDef
} from '../../src/lib/scoring';
import {
	CATEGORY_NAMING,
	CATEGORY_NAMING_NORM,
	MEMORY_INDEX_NORM,
	TILE_A30_ROWS,
	TILE_BUILD,
	TILE_NORMS,
	memoryIndex,
	tileBuild,
	wordRecall
} from './scoring-fixtures';

async function batch(
	doc: unknown
): Promise<{ code: number; out: { discrepancies: Discrepancy[]; summary: { fields_compared: number; discrepancies: number } } | null; stderr: string }> {
	const out = new PassThrough();
	const err = new PassThrough();
	let stdout = '';
	let stderr = '';
	out.setEncoding('utf8').on('data', (d: string) => (stdout += d));
	err.setEncoding('utf8').on('data', (d: string) => (stderr += d));
	const code = await run(Readable.from([Buffer.from(JSON.stringify(doc))]), out, err);
	return { code, out: stdout ? JSON.parse(stdout) : null, stderr };
}

/** [subject, field, pass, kind, value, expected] of each discrepancy, through the batch command. */
async function kinds(doc: unknown): Promise<unknown[][]> {
	const r = await batch(doc);
	expect(r.stderr).toBe('');
	expect(r.code).toBe(0);
	return (r.out as { discrepancies: Discrepancy[] }).discrepancies.map((d) => [d.test ?? d.composite, d.field, d.pass, d.kind, d.value, d.expected]);
}

async function bad(doc: unknown): Promise<string> {
	const r = await batch(doc);
	expect(r.code).toBe(2);
	expect(r.out).toBeNull();
	return r.stderr;
}

// ---------------------------------------------------------------- worked examples

describe('worked examples through the batch command (in-process run)', () => {
	it('word-recall raw 23 vs 32: the second pass’s scaled 9 is follows_other_raw, expected 15, alternative 9', async () => {
		// raw 23 (a30: 24.5, 4.2): z −0.357 → scaled 8.93 → 9; raw 32: z 1.786 → scaled 15.36 → 15
		const doc = wordRecall(
			{ raw: 23, z: -0.36, standard: 95, scaled: 9, t: 46, percentile: 36 },
			{ raw: 32, z: 1.79, standard: 127, scaled: 9, t: 68, percentile: 96 }
		);
		const r = await batch(doc);
		expect(r.out?.discrepancies).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'both', kind: 'transposition', value: 23, other: 32, expected: null, alternative: null, out_of_range: false },
			{ test: 'word-recall', field: 'scaled', pass: 'second', kind: 'follows_other_raw', value: 9, other: 9, expected: 15, alternative: 9, out_of_range: false }
		]);
	});
	it('word-recall raw 29: scaled 15 wrong_norm_group, T 16 transposition out of range', async () => {
		expect(await kinds(wordRecall({ scaled: 15, t: 16 }))).toEqual([
			['word-recall', 'scaled', 'first', 'wrong_norm_group', 15, 13],
			['word-recall', 't', 'first', 'transposition', 16, 61]
		]);
	});
	it('tile-build raw 16 in a30: scaled 14 and percentile 91 agree (z_eq = (14 − 10)/3 = 1.333; Φ(1.33) = .9082, Φ(1.34) = .9099 → .9088 → 90.88 → 91)', async () => {
		const r = await batch(tileBuild());
		expect(r.out).toEqual({ discrepancies: [], summary: { fields_compared: 6, discrepancies: 0 } });
	});
	it('tile-build: scaled 13 is wrong_norm_group (a40 row 16 → 13; also the row below, but the earlier kind wins)', async () => {
		expect(await kinds(tileBuild({ scaled: 13 }))).toEqual([['tile-build', 'scaled', 'first', 'wrong_norm_group', 13, 14]]);
	});
	it('tile-build: scaled 6 is sign_flip (14 mirrored around 10: 20 − 14 = 6)', async () => {
		expect(await kinds(tileBuild({ scaled: 6 }))).toEqual([['tile-build', 'scaled', 'first', 'sign_flip', 6, 14]]);
	});
	it('tile-build: percentile 90 is rounding (⌊90.88⌋), 95 adjacent_row (row 17–18: scaled 15, z_eq 5/3 = 1.667; Φ(1.66) = .9515, Φ(1.67) = .9525 → .9522 → 95)', async () => {
		expect(await kinds(tileBuild({ percentile: 90 }, { percentile: 95 }))).toEqual([
			['tile-build', 'percentile', 'first', 'rounding', 90, 91],
			['tile-build', 'percentile', 'second', 'adjacent_row', 95, 91]
		]);
	});
	it('memory-index: reference sum 13 + 14 = 27, z = (27 − 20)/5.2 = 1.346 → standard 120.19 → 120; Φ(1.34) = .9099, Φ(1.35) = .9115 → .9109 → 91', async () => {
		const r = await batch(memoryIndex());
		// fields: word-recall raw+scaled, tile-build raw+scaled, memory-index sum+standard+percentile = 7, twice
		expect(r.out).toEqual({ discrepancies: [], summary: { fields_compared: 14, discrepancies: 0 } });
	});
	it('memory-index: parts 13 and 13, sum 26 and standard 117 → carried on both (26 → z 6/5.2 = 1.154 → 117.3 → 117)', async () => {
		expect(await kinds(memoryIndex({ 'tile-build': { scaled: 13 }, 'memory-index': { sum: 26, standard: 117 } }))).toEqual([
			['tile-build', 'scaled', 'first', 'wrong_norm_group', 13, 14],
			['memory-index', 'sum', 'first', 'carried', 26, 27],
			['memory-index', 'standard', 'first', 'carried', 117, 120]
		]);
	});
	it('memory-index: the right parts and sum 72 → sum_error (13 + 14 = 27 ≠ 72)', async () => {
		expect(await kinds(memoryIndex({}, { 'memory-index': { sum: 72 } }))).toEqual([['memory-index', 'sum', 'second', 'sum_error', 72, 27]]);
	});
	it('category-naming: predicted 30 − 0.15·46 + 1.2·14 = 39.9; raw 48 → z 8.1/8 = 1.0125: z 1.01, standard 115, T 60, percentile 84', async () => {
		// standard 100 + 15.19 = 115.19 → 115; T 50 + 10.125 = 60.125 → 60; Φ(1.01) = .8438, Φ(1.02) = .8461 → .8444 → 84
		const right = { raw: 48, z: '1.01', standard: 115, t: 60, percentile: 84 };
		const doc = {
			tests: [CATEGORY_NAMING],
			norms: [CATEGORY_NAMING_NORM],
			protocol: { group: 'all', covariates: { age: 46, education: 14 } },
			passes: [
				{ scorer: 'one', scores: { 'category-naming': right } },
				{ scorer: 'two', scores: { 'category-naming': { ...right, z: '-1.01', standard: 116 } } }
			]
		};
		expect(await kinds(doc)).toEqual([
			['category-naming', 'z', 'second', 'sign_flip', '-1.01', 1.01],
			['category-naming', 'standard', 'second', 'rounding', 116, 115] // ⌈115.19⌉
		]);
	});
});

// ---------------------------------------------------------------- tables

/** tile-build reporting every field: raw 16 → scaled 14, z_eq 4/3. */
const TILE_ALL: TestDef = { ...TILE_BUILD, reported: ['z', 'standard', 'scaled', 't', 'percentile'] };

function tileDoc(first: FieldValues, second: FieldValues = {}, test: TestDef = TILE_ALL, norms: unknown[] = TILE_NORMS): ReconcileInput {
	// z R(1.3333, 2) = 1.33; standard 100 + 15·4/3 = 120; T 50 + 40/3 = 63.33 → 63; percentile 91
	const ref = { raw: 16, z: '1.33', standard: 120, scaled: 14, t: 63, percentile: 91 };
	return structuredClone({
		tests: [test],
		norms,
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'one', scores: { 'tile-build': { ...ref, ...first } } },
			{ scorer: 'two', scores: { 'tile-build': { ...ref, ...second } } }
		]
	}) as unknown as ReconcileInput;
}

describe('table norms: the score of its own field, z_eq for the others', () => {
	it('every field from z_eq = 4/3 agrees: z 1.33, standard 120, T 63, percentile 91', () => {
		expect(reconcile(tileDoc({})).discrepancies).toEqual([]);
		expect(testReferences(TILE_ALL, TILE_NORMS[0] as never, 16)).toEqual({ z: 1.33, standard: 120, scaled: 14, t: 63, percentile: 91 });
	});
	it('rounding applies to fields computed from z_eq (T 64 = ⌈63.33⌉), never to the table’s own score', () => {
		const r = reconcile(tileDoc({ t: 64 }));
		expect(r.discrepancies.map((d) => [d.field, d.kind])).toEqual([['t', 'rounding']]);
	});
	it('sign_flip on fields computed from −z_eq: z −1.33, standard 100 − 20 = 80, T 50 − 13.33 = 36.67 → 37', () => {
		const r = reconcile(tileDoc({ z: '-1.33', standard: 80, t: 37 }));
		expect(r.discrepancies.map((d) => [d.field, d.kind])).toEqual([
			['z', 'sign_flip'],
			['standard', 'sign_flip'],
			['t', 'sign_flip']
		]);
	});
	it('adjacent_row only: scaled 15 (row 17–18) also fits wrong_digit (14/15), adjacent_row wins', () => {
		expect(reconcile(tileBuild({ scaled: 15 })).discrepancies.map((d) => [d.field, d.kind, d.expected])).toEqual([['scaled', 'adjacent_row', 14]]);
	});
	it('adjacent_row on a field computed from the neighbouring row’s z_eq: standard from row 15 (scaled 13, z_eq 1) is 115', () => {
		// 115 is also a40's standard for raw 16 (a40: 16 → 13, z_eq 1 → 115), so with a40 present it is wrong_norm_group;
		// with a30 alone it is adjacent_row
		expect(reconcile(tileDoc({ standard: 115 })).discrepancies.map((d) => d.kind)).toEqual(['wrong_norm_group']);
		expect(reconcile(tileDoc({ standard: 115 }, {}, TILE_ALL, [TILE_NORMS[0]])).discrepancies.map((d) => d.kind)).toEqual(['adjacent_row']);
	});
	it('a table with a percentile column: the row’s percentile is the reference; no rounding and no sign_flip on it', () => {
		// invented column; row 16 → 92 (the computed 100·Φ(4/3) would be 91)
		const pct = ['<1', 2, 5, 9, 16, 25, 37, 50, 63, 75, 84, 92, 95, '>99'];
		const rows = TILE_A30_ROWS.map((r, i) => ({ ...r, percentile: pct[i] }));
		const norms = [{ test: 'tile-build', group: 'a30', form: 'table', scale: 'scaled', rows }];
		expect(testReferences(TILE_BUILD, norms[0] as never, 16)).toEqual({ z: 1.33, standard: 120, scaled: 14, t: 63, percentile: 92 });
		// 91: what Φ would give; not rounding (read from a table) → "91"/"92" wrong_digit
		// 9: 100·Φ(−4/3) = 9.1 → 9 would be sign_flip on a computed percentile; here "9" is "92" without the 2 → digit_drop
		// 95: the row below's (17–18) percentile → adjacent_row
		const r = reconcile(tileDoc({ percentile: 91 }, { percentile: 9 }, TILE_BUILD, norms));
		expect(reconcile(tileDoc({ percentile: 92 }, { percentile: 92 }, TILE_BUILD, norms)).discrepancies).toEqual([]);
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected])).toEqual([
			['percentile', 'first', 'wrong_digit', 92],
			['percentile', 'second', 'digit_drop', 92]
		]);
		expect(reconcile(tileDoc({ percentile: 95 }, { percentile: 92 }, TILE_BUILD, norms)).discrepancies.map((d) => d.kind)).toEqual(['adjacent_row']);
		// "<1" on the first row reads as 1: raw 3 → percentile 1
		expect(testReferences(TILE_BUILD, norms[0] as never, 3)?.percentile).toBe(1);
	});
	it('a standard-score table on a timed test with one decimal: rows 2.4 then 2.5 leave no gap; direction already in the table', () => {
		const timed: TestDef = { id: 'block-speed', direction: 'lower_better', raw: { min: 0, max: 10, decimals: 1 }, reported: ['standard', 'percentile'] };
		const rows = [
			{ raw: [0, 2.4], score: 130 },
			{ raw: [2.5, 4.9], score: 115 },
			{ raw: [5.0, 7.4], score: 100 },
			{ raw: [7.5, 10], score: 85 }
		];
		const doc = (first: FieldValues) => ({
			tests: [timed],
			norms: [{ test: 'block-speed', group: 'a30', form: 'table', scale: 'standard', rows }],
			protocol: { group: 'a30' },
			passes: [
				{ scorer: 'one', scores: { 'block-speed': { raw: 3.6, standard: 115, percentile: 84, ...first } } },
				{ scorer: 'two', scores: { 'block-speed': { raw: '3.6', standard: 115, percentile: 84 } } }
			]
		});
		// raw 3.6 → 115, z_eq 1 → percentile 100·Φ(1) = 84.13 → 84
		expect(reconcile(doc({}) as never).discrepancies).toEqual([]);
		// 85: 115 mirrored around 100 → sign_flip (not adjacent: the neighbouring rows give 130 and 100)
		// 100: the row below → adjacent_row
		expect(reconcile(doc({ standard: 85 }) as never).discrepancies.map((d) => d.kind)).toEqual(['sign_flip']);
		expect(reconcile(doc({ standard: 100 }) as never).discrepancies.map((d) => d.kind)).toEqual(['adjacent_row']);
		// 2.45 has two decimals: outside the test's range, so no reference (rule 3)
		expect(testReferences(timed, { test: 'block-speed', group: 'a30', form: 'table', scale: 'standard', rows } as never, 2.45)).toBeNull();
		expect(testReferences(timed, { test: 'block-speed', group: 'a30', form: 'table', scale: 'standard', rows } as never, 2.5)?.standard).toBe(115);
	});
});

// ---------------------------------------------------------------- percentile-only tests

/** error-count: lower_better, raw 0–30; percentile-only tables with bands (invented). */
const ERROR_COUNT: TestDef = { id: 'error-count', direction: 'lower_better', raw: { min: 0, max: 30, decimals: 0 }, reported: ['percentile'] };
const EC_A30 = [
	{ raw: [0, 0], percentile: '>=75' },
	{ raw: [1, 2], percentile: '50-74' },
	{ raw: [3, 5], percentile: '25-49' },
	{ raw: [6, 9], percentile: '10-24' },
	{ raw: [10, 14], percentile: '2-9' },
	{ raw: [15, 30], percentile: '<=1' }
];
const EC_A40 = [
	{ raw: [0, 1], percentile: '>=75' },
	{ raw: [2, 3], percentile: '50-74' },
	{ raw: [4, 6], percentile: '25-49' },
	{ raw: [7, 10], percentile: '10-24' },
	{ raw: [11, 15], percentile: '2-9' },
	{ raw: [16, 30], percentile: '<=1' }
];
function errorCount(first: FieldValues, second: FieldValues): ReconcileInput {
	return structuredClone({
		tests: [ERROR_COUNT],
		norms: [
			{ test: 'error-count', group: 'a30', form: 'table', scale: 'percentile', rows: EC_A30 },
			{ test: 'error-count', group: 'a40', form: 'table', scale: 'percentile', rows: EC_A40 }
		],
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'one', scores: { 'error-count': first } },
			{ scorer: 'two', scores: { 'error-count': second } }
		]
	}) as unknown as ReconcileInput;
}

describe('percentile-only tables with bands', () => {
	it('a band written two ways is the same band (spaces, en dash, ≤/≥)', async () => {
		// raw 4 → a30 row 3–5 → "25-49"; raw 0 → ">=75"
		expect(await kinds(errorCount({ raw: 4, percentile: '25 \u2013 49' }, { raw: 4, percentile: '25-49' }))).toEqual([]);
		expect(await kinds(errorCount({ raw: 0, percentile: '\u2265 75' }, { raw: 0, percentile: '>=75' }))).toEqual([]);
	});
	it('adjacent_row only: raw 4, "50-74" is the row above (a40 gives "25-49" for raw 4, the reference itself)', async () => {
		expect(await kinds(errorCount({ raw: 4, percentile: '50-74' }, { raw: 4, percentile: '10-24' }))).toEqual([
			['error-count', 'percentile', 'first', 'adjacent_row', '50-74', '25-49'],
			['error-count', 'percentile', 'second', 'adjacent_row', '10-24', '25-49']
		]);
	});
	it('fits two: raw 3, "50-74" is both a40’s band and the a30 row above → wrong_norm_group', async () => {
		expect(await kinds(errorCount({ raw: 3, percentile: '50-74' }, { raw: 3, percentile: '25-49' }))).toEqual([
			['error-count', 'percentile', 'first', 'wrong_norm_group', '50-74', '25-49']
		]);
	});
	it('follows_other_raw: raws 4 and 7, the second wrote raw 4’s band', async () => {
		const r = await batch(errorCount({ raw: 4, percentile: '25-49' }, { raw: 7, percentile: '25-49' }));
		// raw 7 → a30 row 6–9 → "10-24"; the raw pair "4"/"7" is one digit differing → wrong_digit
		expect(r.out?.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected, d.alternative])).toEqual([
			['raw', 'both', 'wrong_digit', null, null],
			['percentile', 'second', 'follows_other_raw', '10-24', '25-49']
		]);
	});
	it('only missing and mismatch otherwise, whatever was written: a number against a band, a band against a band', async () => {
		// 30 is a number against the band "25-49"; 150 is outside 0–100 (flag), still mismatch; "24-49" a band nobody has
		expect(await kinds(errorCount({ raw: 4, percentile: 30 }, { raw: 4, percentile: '24-49' }))).toEqual([
			['error-count', 'percentile', 'first', 'mismatch', 30, '25-49'],
			['error-count', 'percentile', 'second', 'mismatch', '24-49', '25-49']
		]);
		const r = await batch(errorCount({ raw: 4, percentile: 150 }, { raw: 4, percentile: null }));
		expect(r.out?.discrepancies.map((d) => [d.pass, d.kind, d.out_of_range])).toEqual([
			['first', 'mismatch', true],
			['second', 'missing', false]
		]);
	});
	it('no reference in one pass (raw missing): bands compared pass with pass; one band two ways agrees', async () => {
		expect(await kinds(errorCount({ raw: null, percentile: '25 - 49' }, { raw: 4, percentile: '25-49' }))).toEqual([
			['error-count', 'raw', 'first', 'missing', null, null]
		]);
		// "52-49" is no band at all (52 > 49): bad input
		expect(await bad(errorCount({ raw: null, percentile: '52-49' }, { raw: 4, percentile: '25-49' }))).toContain('passes[0].scores.error-count.percentile');
		// a different band: peers differ → mismatch, pass both, expected null (not a digit kind: "24-49" vs "25-49")
		expect(await kinds(errorCount({ raw: null, percentile: '24-49' }, { raw: 4, percentile: '25-49' }))).toEqual([
			['error-count', 'raw', 'first', 'missing', null, null],
			['error-count', 'percentile', 'both', 'mismatch', '24-49', null]
		]);
	});
});

// ---------------------------------------------------------------- regression

describe('regression norms', () => {
	const doc = (first: FieldValues, extraNorms: unknown[] = []) => ({
		tests: [CATEGORY_NAMING],
		norms: [CATEGORY_NAMING_NORM, ...extraNorms],
		protocol: { group: 'all', covariates: { age: 46, education: 14 } },
		passes: [
			{ scorer: 'one', scores: { 'category-naming': { raw: 48, z: '1.01', standard: 115, t: 60, percentile: 84, ...first } } },
			{ scorer: 'two', scores: { 'category-naming': { raw: 48, z: '1.01', standard: 115, t: 60, percentile: 84 } } }
		]
	});
	it('wrong_norm_group across forms: a mean/SD group e12 (mean 40, SD 10) gives z 0.8 → standard 112 (fits wrong_digit too: 112/115)', async () => {
		const e12 = { test: 'category-naming', group: 'e12', mean: 40, sd: 10 };
		expect(await kinds(doc({ standard: 112 }, [e12]))).toEqual([['category-naming', 'standard', 'first', 'wrong_norm_group', 112, 115]]);
		// without it, 112 is wrong_digit
		expect(await kinds(doc({ standard: 112 }))).toEqual([['category-naming', 'standard', 'first', 'wrong_digit', 112, 115]]);
	});
	it('rounding on the unrounded values: T 61 = ⌈60.125⌉, percentile 85 = ⌈84.44⌉', async () => {
		expect(await kinds(doc({ t: 61, percentile: 85 }))).toEqual([
			['category-naming', 't', 'first', 'rounding', 61, 60],
			['category-naming', 'percentile', 'first', 'rounding', 85, 84]
		]);
	});
	it('testReferences with covariates gives the same as the worked example', () => {
		expect(testReferences(CATEGORY_NAMING, CATEGORY_NAMING_NORM, 48, { age: 46, education: 14 })).toEqual({
			z: 1.01,
			standard: 115,
			scaled: 13,
			t: 60,
			percentile: 84
		});
		// scaled: 10 + 3·1.0125 = 13.04 → 13
	});
});

// ---------------------------------------------------------------- composites

describe('composites', () => {
	it('carried only: standard 117 from the pass’s own sum 26 fits no other kind (117/120: two digits differ; ⌈120.19⌉ = 121)', () => {
		const r = reconcile(memoryIndex({ 'memory-index': { sum: 26, standard: 117 } }));
		// sum 26 with the right parts 13 + 14 = 27: not their sum → sum_error (and not carried: 26 ≠ 27)
		expect(r.discrepancies.map((d) => [d.composite, d.field, d.kind, d.expected])).toEqual([
			['memory-index', 'sum', 'sum_error', 27],
			['memory-index', 'standard', 'carried', 120]
		]);
	});
	it('carried with no sum entered: s is the sum of the pass’s own parts (13 + 13 = 26 → 117)', () => {
		const r = reconcile(memoryIndex({ 'tile-build': { scaled: 13 }, 'memory-index': { sum: null, standard: 117 } }));
		expect(r.discrepancies.map((d) => [d.test ?? d.composite, d.field, d.kind])).toEqual([
			['tile-build', 'scaled', 'wrong_norm_group'],
			['memory-index', 'sum', 'missing'],
			['memory-index', 'standard', 'carried']
		]);
	});
	it('fits two: sum 26 with own parts 13 + 13 is carried, though 26/27 is also wrong_digit; sum 72 is sum_error, though also a transposition', () => {
		const r = reconcile(memoryIndex({ 'tile-build': { scaled: 13 }, 'memory-index': { sum: 26, standard: 117 } }, { 'memory-index': { sum: 72 } }));
		expect(r.discrepancies.filter((d) => d.field === 'sum').map((d) => [d.pass, d.kind])).toEqual([
			['first', 'carried'],
			['second', 'sum_error']
		]);
	});
	it('with a part missing in a pass, neither carried nor sum_error: sum 72 is a transposition of 27, sum 26 a wrong digit', () => {
		const r = reconcile(
			memoryIndex({ 'tile-build': { scaled: null }, 'memory-index': { sum: 72 } }, { 'tile-build': { scaled: null }, 'memory-index': { sum: 26 } })
		);
		expect(r.discrepancies.filter((d) => d.composite).map((d) => [d.field, d.pass, d.kind])).toEqual([
			['sum', 'first', 'transposition'],
			['sum', 'second', 'wrong_digit']
		]);
	});
	it('composite sum outside the possible sums (2–38 on scaled) is flagged out_of_range; rounding never applies to a sum', () => {
		const r = reconcile(memoryIndex({ 'tile-build': { scaled: null }, 'memory-index': { sum: 45 } }));
		expect(r.discrepancies.filter((d) => d.composite).map((d) => [d.kind, d.out_of_range])).toEqual([['out_of_range', true]]);
	});
	it('a composite table: adjacent_row, sign_flip, wrong_norm_group, and carried over adjacent_row', () => {
		// invented sum table for group a30t on standard; span 2–38; S = 27 → 112, z_eq 0.8 → Φ(0.8) = .7881 → 79
		const rows = [
			{ sum: [2, 19], score: 80 },
			{ sum: [20, 24], score: 95 },
			{ sum: [25, 26], score: 105 },
			{ sum: [27, 28], score: 112 },
			{ sum: [29, 30], score: 118 },
			{ sum: [31, 38], score: 130 }
		];
		const mk = (first: Record<string, FieldValues & { sum?: number }>) => {
			const d = memoryIndex(first) as unknown as {
				norms: unknown[];
				protocol: Record<string, unknown>;
				passes: { scores: Record<string, Record<string, unknown>> }[];
			};
			d.norms.push({ composite: 'memory-index', group: 'a30t', form: 'table', scale: 'standard', rows });
			d.protocol.groups = { 'memory-index': 'a30t' };
			d.passes[1].scores['memory-index'] = { sum: 27, standard: 112, percentile: 79 };
			if (!first['memory-index']?.standard) d.passes[0].scores['memory-index'].standard = first['memory-index']?.standard ?? 112;
			if (first['memory-index']?.percentile === undefined) d.passes[0].scores['memory-index'].percentile = 79;
			return d as unknown as ReconcileInput;
		};
		const k = (first: Record<string, FieldValues & { sum?: number }>) =>
			reconcile(mk(first))
				.discrepancies.filter((d) => d.composite)
				.map((d) => [d.field, d.kind, d.expected]);
		expect(k({})).toEqual([]);
		expect(k({ 'memory-index': { standard: 118 } })).toEqual([['standard', 'adjacent_row', 112]]); // row 29–30
		expect(k({ 'memory-index': { standard: 88 } })).toEqual([['standard', 'sign_flip', 112]]); // 200 − 112
		expect(k({ 'memory-index': { standard: 120 } })).toEqual([['standard', 'wrong_norm_group', 112]]); // a30 mean/SD: 120
		// own parts 13 + 13 = 26 → row 25–26 → 105: carried, though 105 is also the row above
		expect(k({ 'tile-build': { scaled: 13 }, 'memory-index': { sum: 26, standard: 105 } })).toEqual([
			['sum', 'carried', 27],
			['standard', 'carried', 112]
		]);
		// the same 105 with the right parts and sum is the row above → adjacent_row
		expect(k({ 'memory-index': { standard: 105 } })).toEqual([['standard', 'adjacent_row', 112]]);
	});
	it('a part without a reference in a pass: that pass’s composite is compared with the other pass only (rule 3)', () => {
		const r = reconcile(memoryIndex({ 'tile-build': { raw: null }, 'memory-index': { standard: 117 } }));
		expect(r.discrepancies.map((d) => [d.test ?? d.composite, d.field, d.pass, d.kind, d.expected])).toEqual([
			['tile-build', 'raw', 'first', 'missing', null],
			// "117"/"120": two digits differ, nothing else → mismatch
			['memory-index', 'standard', 'both', 'mismatch', null]
		]);
	});
	it('output: composites after all tests, in the order of composites, fields sum … percentile, first before second; "composite" instead of "test"; alternative null', async () => {
		// first pass: parts 13 + 14 = 27 (right); it wrote sum 28, standard 121 (⌈120.19⌉), percentile 92 (⌈91.09⌉)
		// second pass: word-recall raw 30 → z 5.5/4.2 = 1.31 → scaled 13.93 → 14, so its reference sum is 14 + 14 = 28:
		//   z 8/5.2 = 1.538 → standard 123.08 → 123; it wrote sum 29 (≠ its parts 28) and left the percentile empty
		// tile-index (listed first): tile-build alone; the second pass wrote sum 41 (≠ its part 14; outside 1–19)
		const doc = memoryIndex(
			{ 'memory-index': { sum: 28, standard: 121, percentile: 92 }, 'tile-index': { sum: 14 } },
			{ 'word-recall': { raw: 30, scaled: 14 }, 'memory-index': { sum: 29, standard: 123, percentile: null }, 'tile-index': { sum: 41 } }
		) as unknown as { composites: unknown[]; norms: unknown[] };
		doc.composites.unshift({ id: 'tile-index', parts: ['tile-build'], part_field: 'scaled', reported: ['sum'] });
		doc.norms.push({ composite: 'tile-index', group: 'a30', mean: 10, sd: 3 });
		const r = await batch(doc);
		expect(r.stderr).toBe('');
		const ds = r.out?.discrepancies ?? [];
		expect(ds.map((d) => [d.test ?? d.composite, d.field, d.pass, d.kind, d.expected, d.out_of_range])).toEqual([
			['word-recall', 'raw', 'both', 'mismatch', null, false], // "29"/"30": two digits differ
			['tile-index', 'sum', 'second', 'sum_error', 14, true],
			['memory-index', 'sum', 'first', 'sum_error', 27, false],
			['memory-index', 'sum', 'second', 'sum_error', 28, false],
			['memory-index', 'standard', 'first', 'rounding', 120, false],
			['memory-index', 'percentile', 'first', 'rounding', 91, false],
			['memory-index', 'percentile', 'second', 'missing', 94, false] // Φ(1.53) = .9370, Φ(1.54) = .9382 → .9380 → 94
		]);
		for (const d of ds.filter((x) => x.composite)) {
			expect(Object.keys(d)[0]).toBe('composite');
			expect('test' in d).toBe(false);
			expect(d.alternative).toBeNull();
		}
		// 2·(2 + 2) test fields + 2·1 tile-index + 2·3 memory-index
		expect(r.out?.summary.fields_compared).toBe(16);
	});
	it('compositeReferences: a sum’s references through the composite norm', () => {
		expect(compositeReferences(MEMORY_INDEX_NORM, 27, [2, 38])).toEqual({ sum: 27, z: 1.35, standard: 120, scaled: 14, t: 63, percentile: 91 });
		// z 1.346 → 1.35; scaled 10 + 4.04 = 14.04 → 14; T 50 + 13.46 = 63.46 → 63
		expect(compositeReferences(MEMORY_INDEX_NORM, 39, [2, 38])).toBeNull();
	});
});

// ---------------------------------------------------------------- bad input: exit 2 naming the path and row

describe('bad tables, covariates and composites: exit 2, the path names the row, nothing on stdout', () => {
	const tile = (rows: unknown[], extra: Record<string, unknown> = {}) => {
		const d = tileBuild() as unknown as { norms: Record<string, unknown>[] };
		d.norms[0] = { ...d.norms[0], rows, ...extra };
		return d;
	};
	it('a gap: the 7 row left out', async () => {
		const rows = TILE_A30_ROWS.filter((r) => r.raw[0] !== 7);
		expect(await bad(tile(rows))).toContain('reconcile: norms[0].rows[2].raw[0]: gap: raw score 7 is in no row (rows[1] ends at 6)');
	});
	it('an overlap: 6–7 after 5–6', async () => {
		const rows = TILE_A30_ROWS.map((r, i) => (i === 2 ? { ...r, raw: [6, 7] } : r));
		expect(await bad(tile(rows))).toContain('norms[0].rows[2].raw[0]: overlaps rows[1], which ends at 6');
	});
	it('rows that do not start at raw.min or end at raw.max', async () => {
		const rows = TILE_A30_ROWS.map((r, i) => (i === 0 ? { ...r, raw: [1, 4] } : i === 13 ? { ...r, raw: [19, 19] } : r));
		const err = await bad(tile(rows));
		expect(err).toContain('norms[0].rows[0].raw[0]: the first row must start at the lowest raw score 0, not 1');
		expect(err).toContain('norms[0].rows[13].raw[1]: the last row must end at the highest raw score 20, not 19');
	});
	it('one decimal: 2.4 then 2.6 leaves 2.5 out; 2.45 has too many decimals', async () => {
		const timed = { id: 'block-speed', direction: 'lower_better', raw: { min: 0, max: 10, decimals: 1 }, reported: ['standard'] };
		const doc = (rows: unknown[]) => ({
			tests: [timed],
			norms: [{ test: 'block-speed', group: 'a30', form: 'table', scale: 'standard', rows }],
			protocol: { group: 'a30' },
			passes: [
				{ scorer: 'a', scores: {} },
				{ scorer: 'b', scores: {} }
			]
		});
		expect(
			await bad(
				doc([
					{ raw: [0, 2.4], score: 110 },
					{ raw: [2.6, 10], score: 100 }
				])
			)
		).toContain('norms[0].rows[1].raw[0]: gap: raw score 2.5 is in no row (rows[0] ends at 2.4)');
		expect(
			await bad(
				doc([
					{ raw: [0, 2.45], score: 110 },
					{ raw: [2.5, 10], score: 100 }
				])
			)
		).toContain("norms[0].rows[0].raw[1]: 2.45 has more decimals than the test's raw scores (1)");
	});
	it('a score outside its scale (scaled 20 > 19), or not whole, or a test’s own narrower bounds', async () => {
		const rows = TILE_A30_ROWS.map((r, i) => (i === 13 ? { ...r, score: 20 } : i === 12 ? { ...r, score: 15.5 } : r));
		const err = await bad(tile(rows));
		expect(err).toContain("norms[0].rows[13].score: scaled score 20 is outside the scale's bounds 1–19");
		expect(err).toContain('norms[0].rows[12].score: expected a whole number');
		const d = tileBuild() as unknown as { tests: Record<string, unknown>[] };
		d.tests[0].bounds = { scaled: [1, 16] };
		expect(await bad(d)).toContain("norms[0].rows[13].score: scaled score 17 is outside the scale's bounds 1–16");
	});
	it('percentiles on some rows only; a band on a score table', async () => {
		const some = TILE_A30_ROWS.map((r, i) => (i === 0 ? { ...r, percentile: 1 } : r));
		expect(await bad(tile(some))).toContain('norms[0].rows[1].percentile: a table gives percentiles on every row or on none (rows[0] has one)');
		const band = TILE_A30_ROWS.map((r, i) => ({ ...r, percentile: i === 5 ? '20-30' : 50 }));
		expect(await bad(tile(band))).toContain('norms[0].rows[5].percentile: expected a whole number 1–99, "<1" or ">99", got "20-30"');
	});
	it('a percentile-only test that reports another field', async () => {
		const d = errorCount({ raw: 4 }, { raw: 4 }) as unknown as { tests: Record<string, unknown>[] };
		d.tests[0].reported = ['scaled', 'percentile'];
		expect(await bad(d)).toContain(
			'tests[0].reported[0]: test "error-count" has a percentile-only table (norms[0]), so it may report percentile only, not scaled'
		);
	});
	it('a percentile table with a score, or a row without its percentile', async () => {
		const d = errorCount({ raw: 4 }, { raw: 4 }) as unknown as { norms: { rows: Record<string, unknown>[] }[] };
		d.norms[0].rows[1].score = 10;
		delete d.norms[1].rows[2].percentile;
		const err = await bad(d);
		expect(err).toContain('norms[0].rows[1].score: a percentile table has no score');
		expect(err).toContain('norms[1].rows[2].percentile: required on a percentile table');
	});
	it('a missing covariate, for every regression norm in the document, used or not', async () => {
		const doc = {
			tests: [CATEGORY_NAMING],
			norms: [CATEGORY_NAMING_NORM, { ...CATEGORY_NAMING_NORM, group: 'other', coefficients: { age: -0.1, sex: 2 } }],
			protocol: { group: 'all', covariates: { age: 46, education: 14 } },
			passes: [
				{ scorer: 'a', scores: {} },
				{ scorer: 'b', scores: {} }
			]
		};
		expect(await bad(doc)).toContain('norms[1].coefficients.sex: covariate "sex" is not in protocol.covariates');
		const noEdu = { ...doc, protocol: { group: 'all', covariates: { age: 46, sex: 1 } } };
		expect(await bad(noEdu)).toContain('norms[0].coefficients.education: covariate "education" is not in protocol.covariates');
	});
	it('unknown composite parts, a part that does not report part_field, duplicate ids', async () => {
		const d1 = memoryIndex() as unknown as { composites: Record<string, unknown>[]; tests: Record<string, unknown>[] };
		d1.composites[0].parts = ['word-recall', 'tile-bild'];
		expect(await bad(d1)).toContain('composites[0].parts[1]: unknown test "tile-bild"');
		const d2 = memoryIndex() as unknown as { composites: Record<string, unknown>[]; tests: Record<string, unknown>[] };
		d2.tests[1].reported = ['percentile'];
		expect(await bad(d2)).toContain('composites[0].parts[1]: test "tile-build" does not report scaled');
		const d3 = memoryIndex() as unknown as { composites: Record<string, unknown>[] };
		d3.composites[0].id = 'word-recall';
		expect(await bad(d3)).toContain('composites[0].id: duplicate id "word-recall"');
		const d4 = tileBuild() as unknown as { tests: unknown[] };
		d4.tests.push(TILE_BUILD);
		expect(await bad(d4)).toContain('tests[1].id: duplicate test id "tile-build"');
	});
	it('a composite table that does not cover every possible sum (2–38); a composite without norms for its group', async () => {
		const d = memoryIndex() as unknown as { norms: unknown[] };
		d.norms[d.norms.length - 1] = {
			composite: 'memory-index',
			group: 'a30',
			form: 'table',
			scale: 'standard',
			rows: [
				{ sum: [2, 20], score: 90 },
				{ sum: [21, 37], score: 110 }
			]
		};
		expect(await bad(d)).toContain('norms[4].rows[1].sum[1]: the last row must end at the highest sum 38, not 37');
		const e = memoryIndex() as unknown as { norms: unknown[] };
		e.norms.pop();
		expect(await bad(e)).toContain('protocol.group: no norms for composite "memory-index" in group "a30"');
	});
	it('a table on a test whose own raw spec is bad: the test is named, no crash (found by the fuzz test)', async () => {
		const d = tileBuild() as unknown as { tests: { raw: Record<string, number> }[] };
		d.tests[0].raw.decimals = -2218821508126678;
		expect(await bad(d)).toContain('tests[0].raw.decimals: must be 0 or more');
	});
	it('a raw score on a composite, a sum on a test, an unknown form', async () => {
		const d = memoryIndex({ 'memory-index': { raw: 3 } as FieldValues, 'tile-build': { sum: 3 } as FieldValues });
		const err = await bad(d);
		expect(err).toContain('passes[0].scores.memory-index.raw: a composite has no raw score');
		expect(err).toContain('passes[0].scores.tile-build.sum: a test has no sum');
		const f = tileBuild() as unknown as { norms: Record<string, unknown>[] };
		f.norms[1].form = 'lookup';
		expect(await bad(f)).toContain('norms[1].form: expected "mean_sd", "regression" or "table"');
		const g = tileBuild() as unknown as { norms: Record<string, unknown>[] };
		g.norms[0].colour = 'blue';
		expect(await bad(g)).toContain('norms[0].colour: unknown field');
	});
});

// ---------------------------------------------------------------- live checks while typing (blind)

describe('live checks for bands and composite sums (no reference shown)', () => {
	it('a band on a percentile-only test is fine as typed; elsewhere it is not a number', () => {
		expect(checkField(ERROR_COUNT, 'percentile', '25 \u2013 49', { percentileBands: true })).toEqual([]);
		expect(checkField(ERROR_COUNT, 'percentile', '<=5', { percentileBands: true })).toEqual([]);
		expect(checkField(ERROR_COUNT, 'percentile', '52-49', { percentileBands: true }).map((p) => p.code)).toEqual(['not_a_number']);
		expect(checkField(TILE_BUILD, 'percentile', '25-49').map((p) => p.code)).toEqual(['not_a_number']);
	});
	it('a sum that is not the total of the pass’s own parts is pointed out with the pass’s own arithmetic', () => {
		// parts 13 and 13 entered, sum 27: 13 + 13 = 26 (the scorer's numbers, not the reference 27)
		expect(checkCompositeSum([2, 38], [13, '13'], 27)).toEqual([{ code: 'sum_differs', message: 'The part scores entered add up to 13 + 13 = 26, not 27.' }]);
		expect(checkCompositeSum([2, 38], [13, 13], '26')).toEqual([]);
		// a part not yet entered: nothing to compare; a sum outside 2–38 or not whole
		expect(checkCompositeSum([2, 38], [13, null], 40).map((p) => p.code)).toEqual(['out_of_range']);
		expect(checkCompositeSum([2, 38], [13, null], 26.5).map((p) => p.code)).toEqual(['too_many_decimals']);
	});
});

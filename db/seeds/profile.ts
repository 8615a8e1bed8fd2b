/**
 * The second demo battery, scored the way most batteries are: subtests with raw-to-scaled
 * conversion tables per age band, two composites (index scores) looked up from the sum of their
 * parts' scaled scores, one regression-normed test, and one error count with percentile bands only.
 *
 * Every task, parameter, name and number here is invented for the Crosstally demo; none of it is, or
 * is meant to resemble, a published test or normative sample. `tile-build` (groups a30/a40),
 * `category-naming` and the composite `memory-index` are the worked examples of the reconciliation
 * contract (shared/spec/reconcile.md, "Worked examples"), so the demo and the tests agree with it.
 *
 * Written through the catalog services, as a lead would enter it.
 */
import { transaction } from '../../src/lib/server/db';
import { createTest } from '../../src/lib/server/catalog/tests';
import { createNormSet, replaceNormGroups } from '../../src/lib/server/catalog/norms';
import { createBattery } from '../../src/lib/server/catalog/batteries';
import type { NormGroupInput } from '../../src/lib/catalog/schema';
import type { TableRowInput } from '../../src/lib/catalog/norm-forms';
import { DEMO_BANDS, DEMO_TESTS } from './catalog';

export const PROFILE_TESTS = [
	{
		code: 'tile-build',
		name: 'Tile Build',
		domain: 'visuospatial',
		unit: 'points',
		direction: 'higher_better',
		raw: { min: 0, max: 20, decimals: 0 },
		reported: ['scaled', 'percentile'],
		bounds: null,
		reliability: 0.85,
		notes: 'Ten two-colour tile patterns rebuilt from a card; 2 points within 45 s, 1 point within 90 s.'
	},
	{
		code: 'knot-copy',
		name: 'Knot Copy',
		domain: 'visuospatial',
		unit: 'points',
		direction: 'higher_better',
		raw: { min: 0, max: 30, decimals: 0 },
		reported: ['scaled', 'percentile'],
		bounds: null,
		reliability: 0.8,
		notes: 'Fifteen rope-knot line drawings copied; 0–2 points each for crossings and loose ends.'
	},
	{
		code: 'cargo-code',
		name: 'Cargo Code',
		domain: 'processing-speed',
		unit: 'items',
		direction: 'higher_better',
		raw: { min: 0, max: 75, decimals: 0 },
		reported: ['scaled'],
		bounds: null,
		reliability: 0.86,
		notes: 'Crate marks copied under their cargo symbols in 100 seconds.'
	},
	{
		code: 'category-naming',
		name: 'Category Naming',
		domain: 'language',
		unit: 'names',
		direction: 'higher_better',
		raw: { min: 0, max: 80, decimals: 0 },
		reported: ['z', 'standard', 't', 'percentile'],
		bounds: null,
		reliability: 0.78,
		notes: 'Pictured harbour objects named and sorted into five categories in 150 seconds. Regression norms (age, education).'
	},
	{
		code: 'beacon-slips',
		name: 'Beacon Watch False Alarms',
		domain: 'attention',
		unit: 'errors',
		direction: 'lower_better',
		raw: { min: 0, max: 40, decimals: 0 },
		reported: ['percentile'],
		bounds: null,
		reliability: null,
		notes: 'Error count: presses at a decoy beacon during a 5½-minute watch. Skewed; the norms give percentile bands only.'
	}
] as const;

export const PROFILE_BATTERY = {
	code: 'tidewater-profile',
	name: 'Tidewater Cognitive Profile',
	description:
		'Invented demo battery normed as most batteries are: conversion tables per age band, two index scores, one regression-normed test, one error count with percentile bands.',
	tests: ['word-recall', 'tile-build', 'knot-copy', 'cargo-code', 'category-naming', 'beacon-slips'],
	composites: [
		{
			code: 'memory-index',
			name: 'Memory Index',
			parts: ['word-recall', 'tile-build'],
			part_field: 'scaled',
			reported: ['sum', 'standard', 'percentile'],
			reliability: 0.9
		},
		{
			code: 'visuomotor-index',
			name: 'Visuomotor Index',
			parts: ['knot-copy', 'cargo-code'],
			part_field: 'scaled',
			reported: ['sum', 'standard', 'percentile'],
			reliability: 0.88
		}
	]
};

export const PROFILE_NORM_SET = {
	code: 'tidewater-2025',
	name: 'Tidewater Profile Norms 2025',
	version: '2025.1',
	source:
		'INVENTED FOR THE CROSSTALLY DEMO — not a published normative sample. "Tidewater Profile Norms 2025", Harbourview Assessment Group (fictional); tables per age band, regression norms for Category Naming.',
	borrow_days: '30' as const,
	rounding: 'truncate' as const,
	covariate_age: 'whole_years' as const
};

/** reconcile.md, tile-build group a30. */
export const TILE_BUILD_A30: [number, number, number][] = [
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

/**
 * A table moved k raw points (reconcile.md: a40 is a30 moved one point up). Rows pushed past the
 * raw maximum drop out; the first row starts at the minimum and the last ends at the maximum.
 */
export function shiftTable(t: [number, number, number][], k: number, min: number, max: number): [number, number, number][] {
	const out = t.map(([lo, hi, s]) => [lo + k, hi + k, s] as [number, number, number]).filter(([lo, hi]) => hi >= min && lo <= max);
	out[0][0] = min;
	out[out.length - 1][1] = max;
	return out.map(([lo, hi, s]) => [Math.max(min, lo), Math.min(max, hi), s]);
}

/** A scaled-score table from an invented mean/SD: each raw value's score, equal neighbours merged. */
function scaledTable(min: number, max: number, mean: number, sd: number): [number, number, number][] {
	const out: [number, number, number][] = [];
	for (let raw = min; raw <= max; raw++) {
		const s = Math.min(19, Math.max(1, Math.round(10 + (3 * (raw - mean)) / sd)));
		const last = out[out.length - 1];
		if (last && last[2] === s) last[1] = raw;
		else out.push([raw, raw, s]);
	}
	return out;
}

/** Invented per-band means and SDs the knot-copy and cargo-code tables were drawn from (a18 … a70). */
const KNOT_COPY: [number, number][] = [
	[23.1, 3.9],
	[22.6, 4.0],
	[21.7, 4.2],
	[20.4, 4.4],
	[18.6, 4.7],
	[16.2, 5.1]
];
const CARGO_CODE: [number, number][] = [
	[52.4, 9.8],
	[49.6, 9.6],
	[45.9, 9.7],
	[41.8, 9.9],
	[37.0, 10.2],
	[31.5, 10.6]
];
/** memory-index: the sum of two scaled scores; a30 is reconcile.md's 20 / 5.2. */
const MEMORY_INDEX_SD = [5.0, 5.2, 5.3, 5.3, 5.5, 5.6];
/** visuomotor-index sum table (standard scores), the same at every age: sums 2–38. */
export const VISUOMOTOR_INDEX: [number, number, number][] = [
	[2, 4, 55],
	[5, 6, 60],
	[7, 8, 66],
	[9, 10, 71],
	[11, 12, 77],
	[13, 14, 82],
	[15, 16, 88],
	[17, 18, 94],
	[19, 21, 100],
	[22, 23, 106],
	[24, 25, 112],
	[26, 27, 118],
	[28, 29, 123],
	[30, 31, 129],
	[32, 33, 134],
	[34, 35, 140],
	[36, 38, 146]
];
/** beacon-slips: percentile bands as a manual would print them (lower is better). */
export const BEACON_SLIPS: { lo: number; hi: number; percentile: string }[] = [
	{ lo: 0, hi: 1, percentile: '>=75' },
	{ lo: 2, hi: 3, percentile: '50-74' },
	{ lo: 4, hi: 5, percentile: '25-49' },
	{ lo: 6, hi: 8, percentile: '10-24' },
	{ lo: 9, hi: 12, percentile: '5-9' },
	{ lo: 13, hi: 40, percentile: '<=4' }
];

const rows = (t: [number, number, number][]): TableRowInput[] => t.map(([lo, hi, score]) => ({ lo, hi, score, percentile: null }));
const keys = {
	sex: null,
	edu_min: null,
	edu_max: null,
	n: null,
	mean: null,
	sd: null,
	scale: null,
	rows: null,
	intercept: null,
	coefficients: null,
	subject: 'test' as const
};

export function profileGroups(): NormGroupInput[] {
	const groups: NormGroupInput[] = [];
	const wordRecall = DEMO_TESTS.find((t) => t.code === 'word-recall')!;
	for (const [i, b] of DEMO_BANDS.entries()) {
		const band = { group_code: b.code, age_min_months: b.min, age_max_months: b.max };
		const [m, sd] = wordRecall.norms[i];
		groups.push({ ...keys, ...band, test_code: 'word-recall', form: 'mean_sd', mean: m, sd, n: b.n });
		// a18 as a30, a40 one raw point up (as the contract), older bands further up
		groups.push({
			...keys,
			...band,
			test_code: 'tile-build',
			form: 'table',
			scale: 'scaled',
			rows: rows(shiftTable(TILE_BUILD_A30, Math.max(0, i - 1), 0, 20))
		});
		groups.push({ ...keys, ...band, test_code: 'knot-copy', form: 'table', scale: 'scaled', rows: rows(scaledTable(0, 30, ...KNOT_COPY[i])) });
		groups.push({ ...keys, ...band, test_code: 'cargo-code', form: 'table', scale: 'scaled', rows: rows(scaledTable(0, 75, ...CARGO_CODE[i])) });
		groups.push({ ...keys, ...band, test_code: 'memory-index', subject: 'composite', form: 'mean_sd', mean: 20, sd: MEMORY_INDEX_SD[i] });
	}
	const all = { group_code: 'all', age_min_months: DEMO_BANDS[0].min, age_max_months: DEMO_BANDS[DEMO_BANDS.length - 1].max };
	groups.push({
		...keys,
		...all,
		test_code: 'category-naming',
		form: 'regression',
		intercept: 30,
		coefficients: { age: -0.15, education: 1.2 },
		sd: 8,
		n: 612
	});
	groups.push({ ...keys, ...all, test_code: 'beacon-slips', form: 'table', scale: 'percentile', rows: BEACON_SLIPS.map((r) => ({ ...r, score: null })) });
	groups.push({ ...keys, ...all, test_code: 'visuomotor-index', subject: 'composite', form: 'table', scale: 'standard', rows: rows(VISUOMOTOR_INDEX) });
	return groups;
}

export async function seedProfile(): Promise<void> {
	let setId = 0;
	await transaction(async (t) => {
		for (const test of PROFILE_TESTS) await createTest(test, null, t);
		setId = (await createNormSet(PROFILE_NORM_SET, null, t)).id;
	});
	// the composites must exist before their norms are checked against the sums they can take
	await createBattery({ ...PROFILE_BATTERY, norm_set_id: setId }, null);
	await transaction((t) => replaceNormGroups(setId, profileGroups(), t));
}

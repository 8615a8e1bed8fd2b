/** Shared fixtures for the scoring tests: the spec's invented tests and norms. */
import type { FieldValues, ReconcileInput, TestDef, NormDef } from '../../src/lib/scoring';

export const SPEEDED_MATCH: TestDef = {
	id: 'speeded-match',
	direction: 'lower_better',
	raw: { min: 0, max: 300, decimals: 1 },
	reported: ['z', 'standard', 'scaled', 't', 'percentile'],
	bounds: { t: [20, 80] }
};

export const WORD_RECALL: TestDef = {
	id: 'word-recall',
	direction: 'higher_better',
	raw: { min: 0, max: 48, decimals: 0 },
	reported: ['z', 'standard', 'scaled', 't', 'percentile']
};

export const NORMS: NormDef[] = [
	{ test: 'speeded-match', group: 'a30', mean: 42.0, sd: 6.0 },
	{ test: 'word-recall', group: 'a30', mean: 24.5, sd: 4.2 },
	{ test: 'word-recall', group: 'a40', mean: 22.1, sd: 4.6 }
];

/** The spec's batch input example, verbatim. */
export function specExample(): ReconcileInput {
	return structuredClone({
		tests: [SPEEDED_MATCH],
		norms: [NORMS[0]],
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'first-scorer-id', scores: { 'speeded-match': { raw: 36, z: '-1.00', scaled: 7 } } },
			{ scorer: 'second-scorer-id', scores: { 'speeded-match': { raw: '36', standard: 151 } } }
		]
	});
}

/** word-recall, raw 29, group a30: z 1.07, standard 116, scaled 13, T 61, percentile 86. */
export const WR_REF = { raw: 29, z: 1.07, standard: 116, scaled: 13, t: 61, percentile: 86 } as const;

/** A word-recall protocol; `first`/`second` override the reference values field by field. */
export function wordRecall(first: FieldValues = {}, second: FieldValues = {}, opts: { norms?: NormDef[]; test?: Partial<TestDef> } = {}): ReconcileInput {
	const test = { ...WORD_RECALL, ...opts.test };
	return structuredClone({
		tests: [test],
		norms: opts.norms ?? NORMS.filter((n) => n.test === 'word-recall'),
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'one', scores: { 'word-recall': { ...WR_REF, ...first } } },
			{ scorer: 'two', scores: { 'word-recall': { ...WR_REF, ...second } } }
		]
	});
}

// ---------------------------------------------------------------- issue 14: tables, regression, composites

/** tile-build: higher_better, raw 0–20 whole numbers, reports scaled and percentile (spec worked example). */
export const TILE_BUILD: TestDef = {
	id: 'tile-build',
	direction: 'higher_better',
	raw: { min: 0, max: 20, decimals: 0 },
	reported: ['scaled', 'percentile']
};

type Row = { raw: [number, number]; score: number };
/** The spec's a30 table, row by row: 0–4 → 3, 5–6 → 4, 7 → 5, …, 16 → 14, 17–18 → 15, 19–20 → 17. */
export const TILE_A30_ROWS: Row[] = [
	{ raw: [0, 4], score: 3 },
	{ raw: [5, 6], score: 4 },
	{ raw: [7, 7], score: 5 },
	{ raw: [8, 8], score: 6 },
	{ raw: [9, 9], score: 7 },
	{ raw: [10, 10], score: 8 },
	{ raw: [11, 11], score: 9 },
	{ raw: [12, 12], score: 10 },
	{ raw: [13, 13], score: 11 },
	{ raw: [14, 14], score: 12 },
	{ raw: [15, 15], score: 13 },
	{ raw: [16, 16], score: 14 },
	{ raw: [17, 18], score: 15 },
	{ raw: [19, 20], score: 17 }
];
/** The a40 table: "the same table moved one raw point up": 0–5 → 3, 6–7 → 4, 8 → 5, …, 17 → 14, 18–19 → 15, 20 → 17. */
export const TILE_A40_ROWS: Row[] = [
	{ raw: [0, 5], score: 3 },
	{ raw: [6, 7], score: 4 },
	{ raw: [8, 8], score: 5 },
	{ raw: [9, 9], score: 6 },
	{ raw: [10, 10], score: 7 },
	{ raw: [11, 11], score: 8 },
	{ raw: [12, 12], score: 9 },
	{ raw: [13, 13], score: 10 },
	{ raw: [14, 14], score: 11 },
	{ raw: [15, 15], score: 12 },
	{ raw: [16, 16], score: 13 },
	{ raw: [17, 17], score: 14 },
	{ raw: [18, 19], score: 15 },
	{ raw: [20, 20], score: 17 }
];
export const TILE_NORMS = [
	{ test: 'tile-build', group: 'a30', form: 'table' as const, scale: 'scaled' as const, rows: TILE_A30_ROWS },
	{ test: 'tile-build', group: 'a40', form: 'table' as const, scale: 'scaled' as const, rows: TILE_A40_ROWS }
];

/** memory-index over word-recall and tile-build on scaled, mean_sd norm for a30: mean 20, SD 5.2. */
export const MEMORY_INDEX = {
	id: 'memory-index',
	parts: ['word-recall', 'tile-build'],
	part_field: 'scaled' as const,
	reported: ['sum', 'standard', 'percentile'] as ('sum' | 'standard' | 'percentile')[]
};
export const MEMORY_INDEX_NORM = { composite: 'memory-index', group: 'a30', mean: 20, sd: 5.2 };

/** category-naming: higher_better, raw 0–80, regression norm for group all (spec worked example). */
export const CATEGORY_NAMING: TestDef = {
	id: 'category-naming',
	direction: 'higher_better',
	raw: { min: 0, max: 80, decimals: 0 },
	reported: ['z', 'standard', 't', 'percentile']
};
export const CATEGORY_NAMING_NORM = {
	test: 'category-naming',
	group: 'all',
	form: 'regression' as const,
	intercept: 30.0,
	coefficients: { age: -0.15, education: 1.2 },
	sd: 8.0
};

/** tile-build alone, raw 16 in a30 (scaled 14, percentile 91); `first`/`second` override field by field. */
export function tileBuild(first: FieldValues = {}, second: FieldValues = {}, group = 'a30'): ReconcileInput {
	const ref = { raw: 16, scaled: 14, percentile: 91 };
	return structuredClone({
		tests: [TILE_BUILD],
		norms: TILE_NORMS,
		protocol: { group },
		passes: [
			{ scorer: 'one', scores: { 'tile-build': { ...ref, ...first } } },
			{ scorer: 'two', scores: { 'tile-build': { ...ref, ...second } } }
		]
	});
}

/**
 * word-recall (raw 29: scaled 13) + tile-build (raw 16: scaled 14) + memory-index (sum 27, standard 120,
 * percentile 91), all right unless overridden: `first`/`second` map test or composite id → field overrides.
 */
export function memoryIndex(
	first: Record<string, FieldValues & { sum?: FieldValues['raw'] }> = {},
	second: Record<string, FieldValues & { sum?: FieldValues['raw'] }> = {}
): ReconcileInput {
	const right: Record<string, Record<string, unknown>> = {
		'word-recall': { raw: 29, scaled: 13 },
		'tile-build': { raw: 16, scaled: 14 },
		'memory-index': { sum: 27, standard: 120, percentile: 91 }
	};
	const pass = (o: Record<string, Record<string, unknown>>) =>
		Object.fromEntries([...new Set([...Object.keys(right), ...Object.keys(o)])].map((k) => [k, { ...(right[k] ?? {}), ...(o[k] ?? {}) }]));
	return structuredClone({
		tests: [
			{ ...WORD_RECALL, reported: ['scaled'] },
			{ ...TILE_BUILD, reported: ['scaled'] }
		],
		norms: [...NORMS.filter((n) => n.test === 'word-recall'), ...TILE_NORMS, MEMORY_INDEX_NORM],
		composites: [MEMORY_INDEX],
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'one', scores: pass(first) },
			{ scorer: 'two', scores: pass(second) }
		]
	}) as unknown as ReconcileInput;
}

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
export function wordRecall(
	first: FieldValues = {},
	second: FieldValues = {},
	opts: { norms?: NormDef[]; test?: Partial<TestDef> } = {}
): ReconcileInput {
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

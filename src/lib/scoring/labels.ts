/**
 * Descriptive labels for scores, in configurable schemes.
 *
 * Labels are assigned on the score as reported (an integer standard, scaled or T-score) or on the
 * rounded percentile, never on the unrounded normal CDF: standard 130 is the 97.72nd percentile,
 * which is reported as 98 and labelled "exceptionally high", not "above average".
 */
import { roundHalfAway, roundTo, type DerivedField } from './scales';

export type BandId = 'exceptionally_high' | 'above_average' | 'high_average' | 'average' | 'low_average' | 'below_average' | 'exceptionally_low';

export interface Band {
	id: BandId;
	label: string;
	/** Inclusive lower bound on the scale, or null for open-ended. */
	min: number | null;
	/** Inclusive upper bound on the scale, or null for open-ended. */
	max: number | null;
}

export type LabelledField = 'standard' | 'scaled' | 't' | 'percentile';

export interface LabelScheme {
	id: string;
	name: string;
	source: string;
	bands: Readonly<Record<LabelledField, readonly Band[]>>;
}

function bands(labels: readonly string[], cuts: readonly [number, number][]): Band[] {
	// cuts[i] = [min, max] of band i, highest band first; first max and last min are open.
	const ids: BandId[] = ['exceptionally_high', 'above_average', 'high_average', 'average', 'low_average', 'below_average', 'exceptionally_low'];
	return ids.map((id, i) => ({
		id,
		label: labels[i],
		min: i === ids.length - 1 ? null : cuts[i][0],
		max: i === 0 ? null : cuts[i][1]
	}));
}

const AACN_LABELS = ['Exceptionally high', 'Above average', 'High average', 'Average', 'Low average', 'Below average', 'Exceptionally low'];

/**
 * AACN consensus statement on uniform labeling of performance test scores (Guilmette et al., 2020,
 * The Clinical Neuropsychologist 34(3), 437–453), the seven bands for normally distributed scores.
 * The ranges below are from memory of the paper's table (the search tool found the paper's abstract
 * and summaries but not the table itself); they are internally consistent: every T-score and
 * percentile cut is where the corresponding standard-score cut lands after rounding
 * (e.g. standard 120 ↔ z 1.333 ↔ T 63.3 ↔ percentile 90.9 → 91).
 *
 * Scaled scores: the paper's table gives standard scores, T-scores and percentiles. The scaled-score
 * bands here are derived, not quoted: a scaled score s and the standard score 100 + 5(s − 10) are the
 * same z ((s − 10)/3 = (SS − 100)/15), and every scaled score maps onto a whole standard score
 * (a multiple of 5), so each scaled score falls in exactly one standard-score band and therefore on
 * the same percentiles: 16+ ↔ 130+, 14–15 ↔ 120–125, 12–13 ↔ 110–115, 8–11 ↔ 90–105,
 * 6–7 ↔ 80–85, 4–5 ↔ 70–75, ≤3 ↔ ≤65.
 */
export const AACN_2020: LabelScheme = {
	id: 'aacn-2020',
	name: 'AACN consensus 2020',
	source:
		'Guilmette, T. J., et al. (2020). American Academy of Clinical Neuropsychology consensus conference statement on uniform labeling of performance test scores. The Clinical Neuropsychologist, 34(3).',
	bands: {
		standard: bands(AACN_LABELS, [
			[130, 0],
			[120, 129],
			[110, 119],
			[90, 109],
			[80, 89],
			[70, 79],
			[0, 69]
		]),
		t: bands(AACN_LABELS, [
			[70, 0],
			[63, 69],
			[57, 62],
			[43, 56],
			[37, 42],
			[30, 36],
			[0, 29]
		]),
		percentile: bands(AACN_LABELS, [
			[98, 0],
			[91, 97],
			[75, 90],
			[25, 74],
			[9, 24],
			[2, 8],
			[0, 1]
		]),
		scaled: bands(AACN_LABELS, [
			[16, 0],
			[14, 15],
			[12, 13],
			[8, 11],
			[6, 7],
			[4, 5],
			[0, 3]
		])
	}
};

/**
 * The older classification printed in many intelligence-test manuals ("traditional intelligence-test
 * bands"): the same cut points as above on the standard-score scale, with the older names.
 * From memory, as commonly reproduced in assessment textbooks; no test or publisher is named here
 * on purpose. T-score, scaled-score and percentile bands are the same derived cuts as in AACN_2020
 * because the standard-score cut points coincide.
 */
const TRADITIONAL_LABELS = ['Very superior', 'Superior', 'High average', 'Average', 'Low average', 'Borderline', 'Extremely low'];

export const TRADITIONAL_INTELLIGENCE: LabelScheme = {
	id: 'traditional-intelligence',
	name: 'Traditional intelligence-test bands',
	source: 'Older classification used in intelligence-test manuals (from memory); cut points as AACN 2020.',
	bands: {
		standard: AACN_2020.bands.standard.map((b, i) => ({ ...b, label: TRADITIONAL_LABELS[i] })),
		t: AACN_2020.bands.t.map((b, i) => ({ ...b, label: TRADITIONAL_LABELS[i] })),
		percentile: AACN_2020.bands.percentile.map((b, i) => ({ ...b, label: TRADITIONAL_LABELS[i] })),
		scaled: AACN_2020.bands.scaled.map((b, i) => ({ ...b, label: TRADITIONAL_LABELS[i] }))
	}
};

export const LABEL_SCHEMES: Readonly<Record<string, LabelScheme>> = {
	[AACN_2020.id]: AACN_2020,
	[TRADITIONAL_INTELLIGENCE.id]: TRADITIONAL_INTELLIGENCE
};

/**
 * The band of a reported score. Standard, scaled and T-scores are rounded half away from zero first
 * (they are whole numbers on their scales); a percentile is rounded likewise and `"<1"`/`">99"` read as
 * 1/99 by the caller. A z-score is labelled through its standard-score equivalent R(100 + 15·z), with
 * z first rounded to 2 decimals as reported.
 */
export function labelFor(field: DerivedField, value: number, scheme: LabelScheme = AACN_2020): Band {
	let f: LabelledField;
	let v: number;
	if (field === 'z') {
		f = 'standard';
		v = roundHalfAway(100 + 15 * roundTo(value, 2));
	} else {
		f = field;
		v = roundHalfAway(value);
	}
	for (const band of scheme.bands[f]) {
		if ((band.min === null || v >= band.min) && (band.max === null || v <= band.max)) return band;
	}
	// Unreachable: the bands cover the whole line.
	throw new Error(`no band for ${field} ${value}`);
}

/**
 * The kinds of discrepancy, in the order the reconciler tries them (the first that applies wins),
 * with a short name and a plain-words line each. This is the one vocabulary: Review chips, e-mails,
 * Audit filters and tables, CSV and the batch command's documentation all take their words from here.
 */

export const KINDS = [
	'missing',
	'follows_other_raw',
	'carried',
	'sum_error',
	'sign_flip',
	'wrong_norm_group',
	'adjacent_row',
	'wrong_scale',
	'raw_as_derived',
	'decimal_shift',
	'transposition',
	'rounding',
	'digit_drop',
	'digit_extra',
	'wrong_digit',
	'out_of_range',
	'mismatch'
] as const;

export type Kind = (typeof KINDS)[number];

/** Kinds that can be named for a pair of raw scores (and for derived values with no reference). */
export const RAW_PAIR_KINDS: readonly Kind[] = ['missing', 'decimal_shift', 'transposition', 'digit_drop', 'wrong_digit', 'out_of_range', 'mismatch'];

/** Kinds that can be named on a percentile-only test (a percentile read from a percentile table). */
export const PERCENTILE_ONLY_KINDS: readonly Kind[] = ['missing', 'follows_other_raw', 'wrong_norm_group', 'adjacent_row', 'mismatch'];

/** Kinds that only occur on composites. */
export const COMPOSITE_ONLY_KINDS: readonly Kind[] = ['carried', 'sum_error'];

/** Position of a kind in the order (lower wins). */
export const KIND_RANK: Readonly<Record<Kind, number>> = Object.fromEntries(KINDS.map((k, i) => [k, i])) as Record<Kind, number>;

/** Short names for chips, filters and table headings. Our own wording. */
export const KIND_NAMES: Readonly<Record<Kind, string>> = {
	missing: 'Missing',
	follows_other_raw: 'Right for the other raw score',
	carried: 'Carried from own parts',
	sum_error: 'Parts added up wrong',
	sign_flip: 'Direction wrong way round',
	wrong_norm_group: 'Wrong norm group',
	adjacent_row: 'Next row of the table',
	wrong_scale: 'Wrong scale',
	raw_as_derived: 'Raw score copied',
	decimal_shift: 'Decimal shift',
	transposition: 'Digits swapped',
	rounding: 'Rounding',
	digit_drop: 'Digit left out',
	digit_extra: 'Extra digit',
	wrong_digit: 'Wrong digit',
	out_of_range: 'Impossible value',
	mismatch: 'Differs'
};

/** One line per kind for reviewers: what probably happened. Our own wording. */
export const KIND_EXPLANATIONS: Readonly<Record<Kind, string>> = {
	missing: 'Left empty: the field should hold a score but nothing was entered.',
	follows_other_raw:
		'Right for the other pass\u2019s raw score: this pass probably mistyped only its raw score, and the score follows once the raw score is settled.',
	carried: 'Follows from this pass\u2019s own part scores: right arithmetic on a wrong part (or a wrong sum), so it is settled by fixing the part or the sum.',
	sum_error: 'The parts were added up wrong: the sum is not the total of the part scores this pass entered.',
	sign_flip:
		'The direction is the wrong way round: this is the score the raw score would get if the test\u2019s direction were reversed (the sign of z not reversed on a lower-is-better test, or reversed on a higher-is-better one).',
	wrong_norm_group: 'Matches the score from another norm group of this test: probably looked up in the wrong age or demographic band.',
	adjacent_row: 'Matches the row just above or just below the right one in the conversion table: probably read off the neighbouring row.',
	wrong_scale: 'Matches this score on another scale, e.g. a T-score written in the standard-score field.',
	raw_as_derived: 'The raw score was copied into a derived-score field.',
	decimal_shift: 'The right digits with the decimal point moved (ten or a hundred times too big or too small).',
	transposition: 'Two neighbouring digits swapped, as in 47 for 74.',
	rounding: 'Rounded the other way: cut off instead of rounded up, or the reverse (for z, rounded to one decimal).',
	digit_drop: 'One digit left out, as in 13 for 113.',
	digit_extra: 'One digit too many, as in 744 for 74.',
	wrong_digit: 'Same length, one digit different, as in 34 for 74.',
	out_of_range: 'A value that cannot occur on this scale or outside the test\u2019s raw-score range.',
	mismatch: 'Differs, with no recognisable pattern.'
};

export function explainKind(kind: Kind): string {
	return KIND_EXPLANATIONS[kind] ?? 'Differs, with no recognisable pattern.';
}

/** A kind's name in words ("Digits swapped" for `transposition`); a code this list lacks is shown in words. */
export function kindName(kind: Kind | string): string {
	return (KIND_NAMES as Readonly<Record<string, string>>)[kind] ?? kind.replace(/_/g, ' ');
}

/** Every kind with its name and one-line explanation, in the engine's order (for filters, docs and CSV). */
export function kindList(): { id: Kind; name: string; explanation: string }[] {
	return KINDS.map((k) => ({ id: k, name: kindName(k), explanation: explainKind(k) }));
}

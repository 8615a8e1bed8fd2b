/** The kinds of discrepancy, in the order the reconciler tries them, with a plain-words line each. */

export const KINDS = [
	'missing',
	'sign_flip',
	'wrong_norm_group',
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
export const RAW_PAIR_KINDS: readonly Kind[] = [
	'missing',
	'decimal_shift',
	'transposition',
	'digit_drop',
	'wrong_digit',
	'out_of_range',
	'mismatch'
];

/** Position of a kind in the order (lower wins). */
export const KIND_RANK: Readonly<Record<Kind, number>> = Object.fromEntries(KINDS.map((k, i) => [k, i])) as Record<
	Kind,
	number
>;

/** One line per kind for reviewers: what probably happened. Our own wording. */
export const KIND_EXPLANATIONS: Readonly<Record<Kind, string>> = {
	missing: 'Left empty: the field should hold a score but nothing was entered.',
	sign_flip: 'The direction is the wrong way round: this is the score the raw score would get if the test\u2019s direction were reversed (the sign of z not reversed on a lower-is-better test, or reversed on a higher-is-better one).',
	wrong_norm_group: 'Matches the score from another norm group of this test: probably looked up in the wrong age or demographic band.',
	wrong_scale: 'Matches this score on another scale, e.g. a T-score written in the standard-score field.',
	raw_as_derived: 'The raw score was copied into a derived-score field.',
	decimal_shift: 'The right digits with the decimal point moved (ten or a hundred times too big or too small).',
	transposition: 'Two neighbouring digits swapped, as in 47 for 74.',
	rounding: 'Rounded the other way: cut off instead of rounded up, or the reverse (for z, rounded to one decimal).',
	digit_drop: 'One digit left out, as in 13 for 113.',
	digit_extra: 'One digit too many, as in 744 for 74.',
	wrong_digit: 'Same length, one digit different, as in 34 for 74.',
	out_of_range: 'A value that cannot occur on this scale or outside the test’s raw-score range.',
	mismatch: 'Differs, with no recognisable pattern.'
};

export function explainKind(kind: Kind): string {
	return KIND_EXPLANATIONS[kind] ?? 'Differs, with no recognisable pattern.';
}

/**
 * The one name of each kind that people read: Review chips, e-mails, Audit filters and tables, CSV
 * and the batch command's documentation all use these words (never the internal code).
 * Kinds the engine may add later fall back to their code in words (`kindName`).
 */
export const KIND_NAMES: Readonly<Record<string, string>> = {
	missing: 'Missing',
	follows_other_raw: 'Fits the other raw score',
	carried: 'Carried from its parts',
	sum_error: 'Sum wrong',
	sign_flip: 'Direction wrong way round',
	wrong_norm_group: 'Wrong norm group',
	adjacent_row: 'Neighbouring table row',
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

/** A kind's name in words ("Digits swapped" for `transposition`). */
export function kindName(kind: string): string {
	return KIND_NAMES[kind] ?? kind.replace(/_/g, ' ');
}

/** Every kind with its name and one-line explanation, in the engine's order (for filters, docs and CSV). */
export function kindList(): { id: Kind; name: string; explanation: string }[] {
	return KINDS.map((k) => ({ id: k, name: kindName(k), explanation: explainKind(k) }));
}

/**
 * The shapes of the Audit screen's report rows, shared by the server (src/lib/server/audit-stats,
 * which computes them) and the screen's components (which show them). Types only.
 */
import type { Field } from '../scoring/scales';
import type { IccForm } from '../scoring/agreement';

export interface RateCells {
	errors: number;
	fields: number;
	/** Errors per 100 fields entered; null when no fields were entered. */
	rate: number | null;
	/** Wilson 95% interval, per 100 fields. */
	ci_lower: number | null;
	ci_upper: number | null;
}

export interface ScorerRow extends RateCells {
	scorer_id: number | null;
	scorer: string;
	/** Protocol passes entered (one per protocol and round the scorer scored). */
	passes: number;
	/** Errors per protocol pass (errors ÷ passes entered). */
	errors_per_protocol: number | null;
}

export interface KindRow extends RateCells {
	scorer_id: number | null;
	scorer: string;
	kind: string;
	/** The kind's name in words, the same as on Review (src/lib/scoring/kinds.ts). */
	kind_name: string;
}

export interface GroupRow extends RateCells {
	scorer_id: number | null;
	scorer: string;
	group: string;
	group_name: string;
}

export interface WeekRow extends RateCells {
	scorer_id: number | null;
	scorer: string;
	/** Monday of the ISO week, YYYY-MM-DD. */
	week_start: string;
	/** ISO 8601 week, e.g. 2025-W07. */
	week: string;
}

export interface AgreementStats {
	/** Pairs where both passes entered a number. */
	n: number;
	/** Entered by one pass only (the other left it empty or wrote something that is not a number). */
	one_sided: number;
	exact_agreements: number | null;
	exact_percent: number | null;
	label_agreement_percent: number | null;
	kappa: number | null;
	kappa_label: string | null;
	kappa_quadratic: number | null;
	kappa_quadratic_label: string | null;
	kappa_note: string | null;
	icc: Record<IccForm, number | null> | null;
	icc_label: string | null;
	icc_note: string | null;
	bias: number | null;
	sd: number | null;
	loa_lower: number | null;
	loa_upper: number | null;
}

export interface AgreementRow extends AgreementStats {
	field: Field;
}

export interface PairRow extends AgreementStats {
	first_scorer_id: number;
	first_scorer: string;
	second_scorer_id: number;
	second_scorer: string;
	field: Field;
}

export interface BlandAltmanReport {
	field: Field;
	n: number;
	bias: number | null;
	sd: number | null;
	lower: number | null;
	upper: number | null;
	/** Identical points merged: mean of the two entries, difference first − second, how many pairs. */
	points: Array<{ mean: number; difference: number; count: number }>;
}

/** A charge resting on the reviewer's judgement (the kept value contradicts the recomputation). */
export interface JudgementRow {
	id: number;
	entered_at: Date;
	protocol: string;
	protocol_id: number;
	test_code: string;
	test: string;
	field: string;
	field_name: string;
	kind: string;
	kind_name: string;
	scorer: string | null;
	kept: string | null;
	recomputed: string | null;
	note: string | null;
	reviewer: string | null;
	resolved_at: Date | null;
}

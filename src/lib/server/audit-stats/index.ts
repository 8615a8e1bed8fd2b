/**
 * The audit reports behind /api/v1/audit/[report]: each answers one table (columns + rows), so
 * every table on the Audit screen exports to CSV the same way.
 */
import { writeCsv } from '../../csv';
import { KINDS } from '../../scoring/kinds';
import { agreementNotes, DENOMINATOR_NOTE, judgementRows, openCount } from './screen';
import { KOO_LI_2016, LANDIS_KOCH_1977, ICC_FORMS } from '../../scoring/agreement';
import type { AuditFilters } from './filters';
import { groupRates, kindRates, loadNames, scorerRates, weekRates } from './errors';
import { agreementByField, agreementByScorerPair, blandAltmanReport, BAND_LABELS, BAND_ORDER } from './agreement';

export { parseFilters, NO_FILTERS, type AuditFilters } from './filters';
export { recordSubmission, recordResolution } from './record';
export { auditScreen, type AuditScreen } from './screen';

export interface Column {
	key: string;
	label: string;
	/** Numbers are right-aligned with tabular figures; `decimals` for display. */
	numeric?: boolean;
	decimals?: number;
}

export interface ReportResult {
	report: ReportName;
	title: string;
	filters: AuditFilters;
	columns: Column[];
	rows: Record<string, unknown>[];
	/** Anything else the screen needs (interpretation bands, plot statistics). */
	meta?: Record<string, unknown>;
	notes: string[];
}

const RATE_COLUMNS: Column[] = [
	{ key: 'errors', label: 'Errors', numeric: true, decimals: 0 },
	{ key: 'fields', label: 'Fields entered', numeric: true, decimals: 0 },
	{ key: 'rate', label: 'Errors per 100 fields', numeric: true, decimals: 2 },
	{ key: 'ci_lower', label: '95% CI lower (Wilson)', numeric: true, decimals: 2 },
	{ key: 'ci_upper', label: '95% CI upper (Wilson)', numeric: true, decimals: 2 }
];

const AGREEMENT_COLUMNS: Column[] = [
	{ key: 'n', label: 'Pairs (both entered)', numeric: true, decimals: 0 },
	{ key: 'one_sided', label: 'Entered by one pass only', numeric: true, decimals: 0 },
	{ key: 'exact_percent', label: 'Exact agreement %', numeric: true, decimals: 1 },
	{ key: 'label_agreement_percent', label: 'Same label %', numeric: true, decimals: 1 },
	{ key: 'kappa', label: 'Cohen kappa', numeric: true, decimals: 3 },
	{ key: 'kappa_label', label: 'Kappa (Landis & Koch 1977)' },
	{ key: 'kappa_quadratic', label: 'Kappa, quadratic weights', numeric: true, decimals: 3 },
	{ key: 'kappa_quadratic_label', label: 'Weighted kappa (Landis & Koch 1977)' },
	...ICC_FORMS.map((form) => ({ key: form, label: form, numeric: true, decimals: 3 })),
	{ key: 'icc_label', label: 'ICC(2,1) (Koo & Li 2016)' },
	{ key: 'bias', label: 'Bias, first − second', numeric: true, decimals: 2 },
	{ key: 'loa_lower', label: 'Lower limit of agreement', numeric: true, decimals: 2 },
	{ key: 'loa_upper', label: 'Upper limit of agreement', numeric: true, decimals: 2 }
];

const flattenIcc = <T extends { icc: Record<string, number | null> | null }>(r: T) => {
	const { icc, ...rest } = r;
	return { ...rest, ...Object.fromEntries(ICC_FORMS.map((f) => [f, icc?.[f] ?? null])) };
};

type Builder = (f: AuditFilters) => Promise<Omit<ReportResult, 'report' | 'filters'>>;

const REPORTS = {
	scorers: async (f) => {
		const names = await loadNames();
		const [rows, open] = await Promise.all([scorerRates(f, names), openCount(f)]);
		return {
			title: 'Error rate by scorer',
			columns: [
				{ key: 'scorer', label: 'Scorer' },
				{ key: 'passes', label: 'Protocols scored', numeric: true, decimals: 0 },
				...RATE_COLUMNS,
				{ key: 'errors_per_protocol', label: 'Errors per protocol', numeric: true, decimals: 2 }
			],
			rows: rows as unknown as Record<string, unknown>[],
			meta: { openDiscrepancies: open },
			notes: [DENOMINATOR_NOTE, ...(open > 0 ? [`${open} discrepancies are still open and not yet counted.`] : [])]
		};
	},
	kinds: async (f) => {
		const rows = await kindRates(f, await loadNames());
		return {
			title: 'Errors by kind and scorer',
			columns: [{ key: 'kind', label: 'Kind code' }, { key: 'kind_name', label: 'Kind' }, { key: 'scorer', label: 'Scorer' }, ...RATE_COLUMNS],
			rows: rows as unknown as Record<string, unknown>[],
			meta: { kinds: KINDS },
			notes: ['Rate of each kind per 100 fields the scorer entered (all fields, not only those of that kind).']
		};
	},
	tests: async (f) => {
		const rows = await groupRates(f, await loadNames(), 'test');
		return {
			title: 'Errors by test and scorer',
			columns: [{ key: 'group', label: 'Test code' }, { key: 'group_name', label: 'Test' }, { key: 'scorer', label: 'Scorer' }, ...RATE_COLUMNS],
			rows: rows as unknown as Record<string, unknown>[],
			notes: ['Denominator: fields the scorer entered on that test (raw and derived).']
		};
	},
	domains: async (f) => {
		const rows = await groupRates(f, await loadNames(), 'domain');
		return {
			title: 'Errors by domain and scorer',
			columns: [{ key: 'group', label: 'Domain code' }, { key: 'group_name', label: 'Domain' }, { key: 'scorer', label: 'Scorer' }, ...RATE_COLUMNS],
			rows: rows as unknown as Record<string, unknown>[],
			notes: ['Denominator: fields the scorer entered on tests of that domain.']
		};
	},
	fields: async (f) => {
		const rows = await groupRates(f, await loadNames(), 'class');
		return {
			title: 'Errors in raw and derived scores',
			columns: [{ key: 'group', label: 'Field class' }, { key: 'group_name', label: 'Fields' }, { key: 'scorer', label: 'Scorer' }, ...RATE_COLUMNS],
			rows: rows as unknown as Record<string, unknown>[],
			notes: ['Raw: the raw score of each test. Derived: z, standard, scaled, T and percentile entries.']
		};
	},
	weeks: async (f) => {
		const rows = await weekRates(f, await loadNames());
		return {
			title: 'Error rate by ISO week',
			columns: [{ key: 'week', label: 'ISO week' }, { key: 'week_start', label: 'Week starting' }, { key: 'scorer', label: 'Scorer' }, ...RATE_COLUMNS],
			rows: rows as unknown as Record<string, unknown>[],
			notes: ['Weeks run Monday to Sunday (ISO 8601), by the day the pass was submitted.']
		};
	},
	agreement: async (f) => {
		const rows = await agreementByField(f);
		return {
			title: 'Agreement between first and second pass, by field',
			columns: [{ key: 'field', label: 'Field' }, ...AGREEMENT_COLUMNS],
			rows: rows.map(flattenIcc),
			meta: { bands: { kappa: LANDIS_KOCH_1977, icc: KOO_LI_2016 }, categories: BAND_ORDER.map((id) => ({ id, label: BAND_LABELS[id] })) },
			notes: agreementNotes(f)
		};
	},
	'agreement-scorers': async (f) => {
		const rows = await agreementByScorerPair(f, await loadNames());
		return {
			title: `Agreement by scorer pair (${f.field})`,
			columns: [
				{ key: 'first_scorer', label: 'First pass' },
				{ key: 'second_scorer', label: 'Second pass' },
				{ key: 'field', label: 'Field' },
				...AGREEMENT_COLUMNS
			],
			rows: rows.map(flattenIcc),
			meta: { bands: { kappa: LANDIS_KOCH_1977, icc: KOO_LI_2016 } },
			notes: agreementNotes(f)
		};
	},
	judgements: async (f) => {
		const rows = await judgementRows(f);
		return {
			title: 'Charges resting on the reviewer’s judgement',
			columns: [
				{ key: 'protocol', label: 'Protocol' },
				{ key: 'test', label: 'Test' },
				{ key: 'field_name', label: 'Field' },
				{ key: 'scorer', label: 'Scorer charged' },
				{ key: 'kind_name', label: 'Kind' },
				{ key: 'kept', label: 'Kept value' },
				{ key: 'recomputed', label: 'Recomputed' },
				{ key: 'note', label: 'Reviewer’s note' },
				{ key: 'reviewer', label: 'Reviewer' }
			],
			rows: rows as unknown as Record<string, unknown>[],
			notes: [
				'Errors charged where the kept value contradicts the recomputation: the charge rests on the reviewer’s note, not on the arithmetic. A lead can check each against the record form.'
			]
		};
	},
	'bland-altman': async (f) => {
		const r = await blandAltmanReport(f);
		return {
			title: `Bland–Altman: ${f.field} scores, first pass − second pass`,
			columns: [
				{ key: 'mean', label: 'Mean of the two entries', numeric: true, decimals: 1 },
				{ key: 'difference', label: 'Difference, first − second', numeric: true, decimals: 2 },
				{ key: 'count', label: 'Pairs', numeric: true, decimals: 0 }
			],
			rows: r.points,
			meta: { field: r.field, n: r.n, bias: r.bias, sd: r.sd, lower: r.lower, upper: r.upper },
			notes: [
				'Limits of agreement: bias ± 1.96 SD of the differences (Bland & Altman 1986). Identical pairs are drawn as one point; its size shows how many.',
				...agreementNotes(f)
			]
		};
	}
} satisfies Record<string, Builder>;

export type ReportName = keyof typeof REPORTS;
export const REPORT_NAMES = Object.keys(REPORTS) as ReportName[];

export function isReport(name: string): name is ReportName {
	return Object.prototype.hasOwnProperty.call(REPORTS, name);
}

export async function runReport(report: ReportName, filters: AuditFilters): Promise<ReportResult> {
	const r = await (REPORTS[report] as Builder)(filters);
	return { report, filters, ...r };
}

/**
 * The report's table as CSV: a header of column labels, one line per row, numbers as numbers,
 * through the one CSV writer (src/lib/csv.ts: formula-like text escaped); a UTF-8 BOM first.
 */
export function toCsv(result: ReportResult): string {
	const data = result.rows.map((row) =>
		result.columns.map((c) => {
			const v = row[c.key];
			if (v === null || v === undefined) return '';
			if (typeof v === 'number') return Number.isFinite(v) ? Number(v.toFixed(6)) : '';
			return String(v);
		})
	);
	return writeCsv(
		result.columns.map((c) => c.label),
		data,
		{ bom: true }
	);
}

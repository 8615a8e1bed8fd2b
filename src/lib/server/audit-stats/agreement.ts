/**
 * Agreement between the first and second pass on the same protocols (raters = first pass vs
 * second pass). The per-field and per-scorer-pair tables add up the summary cells in SQL: with no
 * date filter the whole-range totals (agreement_total, agreement_pair_total), else the weekly and
 * daily ones (agreement_weekly, agreement_daily, agreement_pair_daily). The Bland–Altman plot reads
 * the identical (first, second) entries of one field already counted (agreement_values) with no
 * date filter, else groups agreement_pairs; kappa and Bland–Altman run on those counts
 * (`cohenKappaFromCounts`, `blandAltmanFromCounts`), never on one array element per pair: at 5M
 * entered fields that list was millions long and cost most of the report's time (issue 18).
 */
import { select } from '../db';
import { blandAltmanFromCounts, cohenKappaFromCounts, interpretIcc, interpretKappa, ICC_FORMS } from '../../scoring/agreement';
import { AACN_2020 } from '../../scoring/labels';
import { FIELDS, type Field } from '../../scoring/scales';
import type { AuditFilters } from './filters';
import { agreementDailyWhere, pairDailyWhere, pairsWhere, splitRange, sumTotalWithDeltas, sumWithDeltas, valuesWhere } from './sql';
import { addSums, blandAltmanFromSums, iccFromSums, ZERO_SUMS, type PairSums } from './sums';
import type { Names } from './errors';
import type { AgreementStats, AgreementRow, PairRow, BlandAltmanReport } from '../../audit/types';

export type { AgreementStats, AgreementRow, PairRow, BlandAltmanReport };

/** Band ids in the scheme's order (highest first): the kappa categories. */
export const BAND_ORDER: string[] = AACN_2020.bands.standard.map((b) => b.id);
export const BAND_LABELS: Record<string, string> = Object.fromEntries(AACN_2020.bands.standard.map((b) => [b.id, b.label]));

/** One summary cell: a (first label, second label) combination with its counts and sums. */
interface Cell extends Partial<PairSums> {
	lx: string;
	ly: string;
	one_sided: number;
	exact: number;
}

/**
 * Statistics of a set of summary cells: exact agreement from the counts; Cohen's kappa (unweighted
 * and quadratic, AACN band order) by `cohenKappaFromCounts` on the label pairs' counts; ICC and
 * Bland–Altman from the sums (sums.ts).
 */
export function statsOf(cells: Cell[], field: Field): AgreementStats {
	let sums = { ...ZERO_SUMS };
	let oneSided = 0;
	let exact = 0;
	const labels: Array<[string, string, number]> = [];
	for (const c of cells) {
		sums = addSums(sums, c);
		oneSided += Number(c.one_sided ?? 0);
		exact += Number(c.exact ?? 0);
		const n = Number(c.pairs ?? 0);
		if (c.lx && c.ly && n > 0) labels.push([c.lx, c.ly, n]);
	}
	const n = sums.pairs;
	const out: AgreementStats = {
		n,
		one_sided: oneSided,
		exact_agreements: null,
		exact_percent: null,
		label_agreement_percent: null,
		kappa: null,
		kappa_label: null,
		kappa_quadratic: null,
		kappa_quadratic_label: null,
		kappa_note: null,
		icc: null,
		icc_label: null,
		icc_note: null,
		bias: null,
		sd: null,
		loa_lower: null,
		loa_upper: null
	};
	if (n === 0) return out;
	out.exact_agreements = exact;
	out.exact_percent = (100 * exact) / n;
	if (field !== 'raw' && labels.length > 0) {
		const k = cohenKappaFromCounts(labels, { categories: BAND_ORDER });
		const kq = cohenKappaFromCounts(labels, { categories: BAND_ORDER, weights: 'quadratic' });
		out.label_agreement_percent = 100 * k.observed;
		out.kappa = k.kappa;
		out.kappa_label = interpretKappa(k.kappa)?.label ?? null;
		out.kappa_quadratic = kq.kappa;
		out.kappa_quadratic_label = interpretKappa(kq.kappa)?.label ?? null;
		out.kappa_note = k.undefinedReason ? 'undefined: every pair in one category' : null;
	}
	const icc = iccFromSums(sums);
	if (icc) {
		out.icc = icc.icc;
		out.icc_label = interpretIcc(icc.icc['ICC(2,1)'])?.label ?? null;
		out.icc_note = icc.undefinedReason;
	}
	const ba = blandAltmanFromSums(sums);
	if (ba) {
		out.bias = ba.bias;
		out.sd = ba.sd;
		out.loa_lower = ba.lower;
		out.loa_upper = ba.upper;
	}
	return out;
}

/** The sums of a set of summary cells (agreement_daily, agreement_weekly, agreement_pair_daily). */
const SUMS: Array<[string, string]> = ['pairs', 'one_sided', 'exact', 'sx', 'sy', 'sxx', 'syy', 'sxy', 'sd', 'sdd'].map((c) => [c, `SUM(s.${c})`]);

/** The cells of agreementByField: with no date filter from the whole-range agreement_total (plus the weekly delta rows not yet folded). */
const FIELD_GROUPS: Array<[string, string]> = [
	['field', 's.field'],
	['lx', 's.first_label'],
	['ly', 's.second_label']
];

/**
 * One row per field (raw, z, standard, scaled, t, percentile): with no date filter from
 * agreement_total; else whole weeks from agreement_weekly, edge days from agreement_daily.
 */
export async function agreementByField(f: AuditFilters): Promise<AgreementRow[]> {
	if (!f.from && !f.to) {
		const w = agreementDailyWhere(f, { from: null, to: null });
		return byField(await select<Cell & { field: Field }>(sumTotalWithDeltas('agreement_total', w, 's', FIELD_GROUPS, SUMS), w.params));
	}
	const split = splitRange(f.from, f.to);
	const query = (table: 'agreement_weekly' | 'agreement_daily', col: string, range: { from: string | null; to: string | null }) => {
		const w = agreementDailyWhere(f, range, col);
		return select<Cell & { field: Field }>(sumWithDeltas(table, w, 's', FIELD_GROUPS, SUMS), w.params);
	};
	const parts = await Promise.all([
		...(split.weeks ? [query('agreement_weekly', 'week', split.weeks)] : []),
		...split.days.map((d) => query('agreement_daily', 'day', d))
	]);
	return byField(parts.flat());
}

function byField(rows: Array<Cell & { field: Field }>): AgreementRow[] {
	return FIELDS.map((field) => ({
		field,
		...statsOf(
			rows.filter((r) => r.field === field),
			field
		)
	})).filter((r) => r.n + r.one_sided > 0);
}

/** One row per (first scorer, second scorer) on the chosen field: agreement_pair_total with no date filter, else agreement_pair_daily. */
export async function agreementByScorerPair(f: AuditFilters, names: Names): Promise<PairRow[]> {
	const w = pairDailyWhere(f);
	const groups: Array<[string, string]> = [
		['a', 's.first_scorer_id'],
		['b', 's.second_scorer_id'],
		['lx', 's.first_label'],
		['ly', 's.second_label']
	];
	const sql = !f.from && !f.to ? sumTotalWithDeltas('agreement_pair_total', w, 's', groups, SUMS) : sumWithDeltas('agreement_pair_daily', w, 's', groups, SUMS);
	const rows = await select<Cell & { a: number; b: number }>(sql, w.params);
	const byPair = new Map<string, Cell[]>();
	for (const r of rows) {
		const k = `${r.a}|${r.b}`;
		const list = byPair.get(k) ?? [];
		list.push(r);
		byPair.set(k, list);
	}
	const out: PairRow[] = [];
	for (const [k, cells] of byPair) {
		const [a, b] = k.split('|').map(Number);
		const stats = statsOf(cells, f.field);
		if (stats.n + stats.one_sided === 0) continue;
		out.push({
			first_scorer_id: a,
			first_scorer: names.scorers.get(a) ?? `#${a}`,
			second_scorer_id: b,
			second_scorer: names.scorers.get(b) ?? `#${b}`,
			field: f.field,
			...stats
		});
	}
	out.sort((p, q) => q.n - p.n || p.first_scorer.localeCompare(q.first_scorer));
	return out;
}

/**
 * The plot's points (identical pairs counted once, with how many) and bias and limits over every
 * pair both passes entered. With no date filter the counts come pre-binned from agreement_values
 * (plus its delta rows not yet folded); else agreement_pairs is grouped. Rows in (first, second)
 * order, so the pairs are added up in the same order either way.
 */
export async function blandAltmanReport(f: AuditFilters): Promise<BlandAltmanReport> {
	let rows: Array<{ x: number; y: number; n: number }>;
	if (!f.from && !f.to) {
		const w = valuesWhere(f, f.field);
		rows = await select<{ x: number; y: number; n: number }>(
			`SELECT x, y, SUM(n) AS n FROM (${[`agreement_values`, `agreement_values_delta`]
				.map((t) => `SELECT v.first_value AS x, v.second_value AS y, SUM(v.pairs) AS n FROM ${t} v ${w.sql} GROUP BY v.first_value, v.second_value`)
				.join(' UNION ALL ')}) u
			  GROUP BY x, y HAVING SUM(n) <> 0 ORDER BY x, y`,
			w.params
		);
	} else {
		const w = pairsWhere(f, f.field);
		rows = await select<{ x: number; y: number; n: number }>(
			`SELECT g.first_value AS x, g.second_value AS y, COUNT(*) AS n FROM agreement_pairs g
			  ${w.sql} AND g.first_value IS NOT NULL AND g.second_value IS NOT NULL
			  GROUP BY g.first_value, g.second_value ORDER BY g.first_value, g.second_value`,
			w.params
		);
	}
	const counts: Array<[number, number, number]> = [];
	const merged = new Map<string, { mean: number; difference: number; count: number }>();
	let n = 0;
	for (const r of rows) {
		const x = Number(r.x);
		const y = Number(r.y);
		const c = Number(r.n);
		counts.push([x, y, c]);
		n += c;
		const mean = (x + y) / 2;
		const difference = x - y;
		const key = `${mean}|${difference}`;
		const m = merged.get(key);
		if (m) m.count += c;
		else merged.set(key, { mean, difference, count: c });
	}
	const stats = n >= 2 ? blandAltmanFromCounts(counts) : null;
	return {
		field: f.field,
		n,
		bias: stats?.bias ?? null,
		sd: stats?.sd ?? null,
		lower: stats?.lower ?? null,
		upper: stats?.upper ?? null,
		points: [...merged.values()].sort((a, b) => a.mean - b.mean || a.difference - b.difference)
	};
}

export { ICC_FORMS };

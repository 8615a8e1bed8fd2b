/**
 * Agreement between the first and second pass on the same protocols, from agreement_pairs.
 * SQL groups identical (first, second) entries with a count, so a field with 30,000 pairs comes
 * back as a few hundred rows; the statistics are the pure functions of src/lib/scoring/agreement.ts
 * run on the expanded pairs (raters = first pass vs second pass).
 */
import { select } from '../db';
import {
	blandAltman,
	cohenKappa,
	intraclassCorrelation,
	interpretIcc,
	interpretKappa,
	percentAgreement,
	ICC_FORMS,
	type IccForm
} from '../../scoring/agreement';
import { AACN_2020 } from '../../scoring/labels';
import { FIELDS, type Field } from '../../scoring/scales';
import type { AuditFilters } from './filters';
import { pairsWhere } from './sql';
import type { Names } from './errors';

/** Band ids in the scheme's order (highest first): the kappa categories. */
export const BAND_ORDER: string[] = AACN_2020.bands.standard.map((b) => b.id);
export const BAND_LABELS: Record<string, string> = Object.fromEntries(AACN_2020.bands.standard.map((b) => [b.id, b.label]));

interface Grouped {
	x: number | null;
	y: number | null;
	lx: string | null;
	ly: string | null;
	n: number;
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

/** Statistics of one set of grouped pairs. */
export function statsOf(groups: Grouped[], field: Field): AgreementStats {
	const numbers: Array<[number, number]> = [];
	const labels: Array<[string, string]> = [];
	let oneSided = 0;
	for (const g of groups) {
		const c = Number(g.n);
		if (g.x !== null && g.y !== null) {
			const x = Number(g.x);
			const y = Number(g.y);
			for (let i = 0; i < c; i++) numbers.push([x, y]);
			if (g.lx && g.ly) for (let i = 0; i < c; i++) labels.push([g.lx, g.ly]);
		} else if (g.x !== null || g.y !== null) oneSided += c;
	}
	const out: AgreementStats = {
		n: numbers.length,
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
	if (numbers.length === 0) return out;
	const pa = percentAgreement(numbers);
	out.exact_agreements = pa.agreements;
	out.exact_percent = pa.percent;
	if (field !== 'raw' && labels.length > 0) {
		const k = cohenKappa(labels, { categories: BAND_ORDER });
		const kq = cohenKappa(labels, { categories: BAND_ORDER, weights: 'quadratic' });
		out.label_agreement_percent = 100 * k.observed;
		out.kappa = k.kappa;
		out.kappa_label = interpretKappa(k.kappa)?.label ?? null;
		out.kappa_quadratic = kq.kappa;
		out.kappa_quadratic_label = interpretKappa(kq.kappa)?.label ?? null;
		out.kappa_note = k.undefinedReason ? 'undefined: every pair in one category' : null;
	}
	if (numbers.length >= 2) {
		const icc = intraclassCorrelation(numbers);
		out.icc = icc.icc;
		out.icc_label = interpretIcc(icc.icc['ICC(2,1)'])?.label ?? null;
		out.icc_note = icc.undefinedReason;
		const ba = blandAltman(numbers);
		out.bias = ba.bias;
		out.sd = ba.sd;
		out.loa_lower = ba.lower;
		out.loa_upper = ba.upper;
	}
	return out;
}

export interface AgreementRow extends AgreementStats {
	field: Field;
}

/** One row per field (raw, z, standard, scaled, t, percentile). */
export async function agreementByField(f: AuditFilters): Promise<AgreementRow[]> {
	const w = pairsWhere(f, null);
	const rows = await select<Grouped & { field: Field }>(
		`SELECT g.field, g.first_value AS x, g.second_value AS y, g.first_label AS lx, g.second_label AS ly, COUNT(*) AS n
		   FROM agreement_pairs g ${w.sql}
		  GROUP BY g.field, g.first_value, g.second_value, g.first_label, g.second_label`,
		w.params
	);
	return FIELDS.map((field) => ({ field, ...statsOf(rows.filter((r) => r.field === field), field) })).filter((r) => r.n + r.one_sided > 0);
}

export interface PairRow extends AgreementStats {
	first_scorer_id: number;
	first_scorer: string;
	second_scorer_id: number;
	second_scorer: string;
	field: Field;
}

/** One row per (first scorer, second scorer) on the chosen field. */
export async function agreementByScorerPair(f: AuditFilters, names: Names): Promise<PairRow[]> {
	const w = pairsWhere(f, f.field);
	const rows = await select<Grouped & { a: number; b: number }>(
		`SELECT g.first_scorer_id AS a, g.second_scorer_id AS b, g.first_value AS x, g.second_value AS y,
		        g.first_label AS lx, g.second_label AS ly, COUNT(*) AS n
		   FROM agreement_pairs g ${w.sql}
		  GROUP BY g.first_scorer_id, g.second_scorer_id, g.first_value, g.second_value, g.first_label, g.second_label`,
		w.params
	);
	const byPair = new Map<string, Array<Grouped & { a: number; b: number }>>();
	for (const r of rows) {
		const k = `${r.a}|${r.b}`;
		byPair.set(k, [...(byPair.get(k) ?? []), r]);
	}
	const out: PairRow[] = [];
	for (const [k, groups] of byPair) {
		const [a, b] = k.split('|').map(Number);
		out.push({
			first_scorer_id: a,
			first_scorer: names.scorers.get(a) ?? `#${a}`,
			second_scorer_id: b,
			second_scorer: names.scorers.get(b) ?? `#${b}`,
			field: f.field,
			...statsOf(groups, f.field)
		});
	}
	out.sort((p, q) => q.n - p.n || p.first_scorer.localeCompare(q.first_scorer));
	return out;
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

export async function blandAltmanReport(f: AuditFilters): Promise<BlandAltmanReport> {
	const w = pairsWhere(f, f.field);
	const rows = await select<{ x: number; y: number; n: number }>(
		`SELECT g.first_value AS x, g.second_value AS y, COUNT(*) AS n FROM agreement_pairs g
		  ${w.sql ? `${w.sql} AND` : 'WHERE'} g.first_value IS NOT NULL AND g.second_value IS NOT NULL
		  GROUP BY g.first_value, g.second_value`,
		w.params
	);
	const pairs: Array<[number, number]> = [];
	const merged = new Map<string, { mean: number; difference: number; count: number }>();
	for (const r of rows) {
		const x = Number(r.x);
		const y = Number(r.y);
		const c = Number(r.n);
		for (let i = 0; i < c; i++) pairs.push([x, y]);
		const mean = (x + y) / 2;
		const difference = x - y;
		const key = `${mean}|${difference}`;
		const m = merged.get(key);
		if (m) m.count += c;
		else merged.set(key, { mean, difference, count: c });
	}
	const stats = pairs.length >= 2 ? blandAltman(pairs) : null;
	return {
		field: f.field,
		n: pairs.length,
		bias: stats?.bias ?? null,
		sd: stats?.sd ?? null,
		lower: stats?.lower ?? null,
		upper: stats?.upper ?? null,
		points: [...merged.values()].sort((a, b) => a.mean - b.mean || a.difference - b.difference)
	};
}

export { ICC_FORMS };

/**
 * The Audit screen in one call (`auditScreen`): the filter choices, the interpretation bands and —
 * when the filters are valid — every table and chart of the screen, typed, from the same functions
 * as the CSV reports (index.ts). The route only parses the URL (filters.ts) and calls this.
 */
import { select } from '../db';
import { kindList, kindName } from '../../scoring/kinds';
import { FIELD_LABELS } from '../../status';
import { KOO_LI_2016, LANDIS_KOCH_1977 } from '../../scoring/agreement';
import type { JudgementRow } from '../../audit/types';
import type { AuditFilters } from './filters';
import { errorWhere } from './sql';
import { groupRates, kindRates, loadNames, scorerRates, weekRates } from './errors';
import { agreementByField, agreementByScorerPair, blandAltmanReport } from './agreement';

export const DENOMINATOR_NOTE =
	'Errors are resolved discrepancies counted against each pass whose value was not kept (a shared error counts against both scorers). ' +
	'Fields entered: the fields in each scorer’s submitted passes. 95% intervals: Wilson score interval.';

export function agreementNotes(f: AuditFilters): string[] {
	const out = [
		'Entries as the two scorers typed them, before review. Kappa on AACN (2020) descriptive labels, categories in the scheme’s order; ICC per Shrout & Fleiss (1979), raters = first vs second pass.'
	];
	if (f.kind) out.push('The kind filter does not apply to agreement (it describes discrepancies, not entries).');
	if (f.scorer !== null) out.push('Scorer filter: protocols where the scorer entered either pass.');
	return out;
}

/** Discrepancies not yet resolved (so not yet charged), under the battery, test and kind filters. Raw SQL: a filtered count over a join. */
export async function openCount(f: AuditFilters): Promise<number> {
	const row = await select<{ n: number }>(
		`SELECT COUNT(*) AS n FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id
		  WHERE d.resolved_at IS NULL ${f.battery !== null ? 'AND p.battery_id = :battery' : ''} ${f.test !== null ? 'AND d.test_code = :test' : ''}
		  ${f.kind !== null ? 'AND d.kind = :kind' : ''}`,
		{ battery: f.battery, test: f.test, kind: f.kind }
	);
	return Number(row[0]?.n ?? 0);
}

/** Charges resting on the reviewer's judgement, newest first (500 at most). Raw SQL: a six-table join under the report filters. */
export async function judgementRows(f: AuditFilters): Promise<JudgementRow[]> {
	const w = errorWhere(f, 'e');
	const rows = await select<Omit<JudgementRow, 'field_name' | 'kind_name'>>(
		`SELECT e.id, e.entered_at, x.code AS protocol, e.protocol_id, e.test_code, COALESCE(t.name, c.name, e.test_code) AS test, e.field, e.kind,
		        u.name AS scorer, d.resolved_value AS kept, d.expected AS recomputed, d.note, r.name AS reviewer, d.resolved_at
		   FROM error_events e
		   JOIN discrepancies d ON d.id = e.discrepancy_id
		   JOIN protocols p ON p.id = e.protocol_id
		   JOIN examinees x ON x.id = p.examinee_id
		   LEFT JOIN users u ON u.id = e.scorer_id
		   LEFT JOIN users r ON r.id = d.resolved_by
		   LEFT JOIN (SELECT code, MAX(name) AS name FROM tests GROUP BY code) t ON t.code = e.test_code
		   LEFT JOIN (SELECT code, MAX(name) AS name FROM composites GROUP BY code) c ON c.code = e.test_code
		   ${w.sql ? `${w.sql} AND e.judgement = 1` : 'WHERE e.judgement = 1'}
		  ORDER BY e.entered_at DESC, e.id DESC LIMIT 500`,
		w.params
	);
	return rows.map((r) => ({
		...r,
		id: Number(r.id),
		protocol_id: Number(r.protocol_id),
		field_name: FIELD_LABELS[r.field] ?? r.field,
		kind_name: kindName(r.kind)
	}));
}

/**
 * The filters' choices: scorers (anyone with the role, or anyone with entries in the summaries),
 * batteries, current tests, kinds. Raw SQL: the role is a SET column (FIND_IN_SET) and the summary
 * and its delta rows are read as one set.
 */
async function filterOptions() {
	const [scorers, batteries, tests] = await Promise.all([
		select<{ id: number; name: string }>(
			`SELECT id, name FROM users WHERE FIND_IN_SET('scorer', roles) > 0
			    OR id IN (SELECT scorer_id FROM audit_daily UNION SELECT scorer_id FROM audit_daily_delta) ORDER BY name`
		),
		select<{ id: number; name: string }>('SELECT id, name FROM batteries ORDER BY name'),
		select<{ code: string; name: string; domain: string }>('SELECT code, name, domain FROM tests WHERE is_current = 1 ORDER BY name')
	]);
	return {
		scorers: scorers.map((s) => ({ id: Number(s.id), name: s.name })),
		batteries: batteries.map((b) => ({ id: Number(b.id), name: b.name })),
		tests,
		kinds: kindList().map((k) => ({ id: k.id as string, label: k.name, explanation: k.explanation }))
	};
}

/** Everything the Audit screen shows; `reports` is null when the filters were not valid (nothing is counted then). */
export async function auditScreen(filters: AuditFilters | null) {
	const [options, names] = await Promise.all([filterOptions(), filters ? loadNames() : null]);
	const bands = { kappa: LANDIS_KOCH_1977, icc: KOO_LI_2016 };
	if (!filters || !names) return { options, bands, reports: null };
	const f = filters;
	const [scorers, openDiscrepancies, kinds, tests, domains, fields, weeks, judgements, agreement, pairs, blandAltman] = await Promise.all([
		scorerRates(f, names),
		openCount(f),
		kindRates(f, names),
		groupRates(f, names, 'test'),
		groupRates(f, names, 'domain'),
		groupRates(f, names, 'class'),
		weekRates(f, names),
		judgementRows(f),
		agreementByField(f),
		agreementByScorerPair(f, names),
		blandAltmanReport(f)
	]);
	return {
		options,
		bands,
		reports: {
			scorers,
			scorerNotes: [DENOMINATOR_NOTE, ...(openDiscrepancies > 0 ? [`${openDiscrepancies} discrepancies are still open and not yet counted.`] : [])],
			openDiscrepancies,
			kinds,
			tests,
			domains,
			fields,
			weeks,
			judgements,
			agreement,
			agreementNotes: agreementNotes(f),
			pairs,
			blandAltman
		}
	};
}

export type AuditScreen = Awaited<ReturnType<typeof auditScreen>>;

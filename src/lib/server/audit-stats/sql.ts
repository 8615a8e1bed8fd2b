/**
 * WHERE clauses for the audit queries, one builder per source table, from the filters. Column
 * names are fixed here; only values go through replacements.
 */
import { dayAfter, type AuditFilters } from './filters';

export interface Where {
	sql: string;
	params: Record<string, unknown>;
}

function build(parts: Array<[boolean, string]>, params: Record<string, unknown>): Where {
	const on = parts.filter(([use]) => use).map(([, s]) => s);
	return { sql: on.length ? `WHERE ${on.join(' AND ')}` : '', params };
}

function common(f: AuditFilters) {
	return { from: f.from, toNext: f.to ? dayAfter(f.to) : null, scorer: f.scorer, battery: f.battery, test: f.test, kind: f.kind };
}

/** error_events e: every filter applies, kind included. */
export function errorWhere(f: AuditFilters, alias = 'e'): Where {
	const a = alias;
	return build(
		[
			[!!f.from, `${a}.entered_at >= :from`],
			[!!f.to, `${a}.entered_at < :toNext`],
			[f.scorer !== null, `${a}.scorer_id = :scorer`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.test !== null, `${a}.test_code = :test`],
			[f.kind !== null, `${a}.kind = :kind`]
		],
		common(f)
	);
}

/** audit_fields a (per pass × test denominators): kind does not restrict what was entered. */
export function fieldsWhere(f: AuditFilters, alias = 'a'): Where {
	const a = alias;
	return build(
		[
			[!!f.from, `${a}.entered_at >= :from`],
			[!!f.to, `${a}.entered_at < :toNext`],
			[f.scorer !== null, `${a}.scorer_id = :scorer`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.test !== null, `${a}.test_code = :test`]
		],
		common(f)
	);
}

/** passes p JOIN protocols pr (per pass denominators, passes.fields_entered). No test filter here. */
export function passesWhere(f: AuditFilters): Where {
	return build(
		[
			[true, `p.status = 'submitted'`],
			[!!f.from, `p.submitted_at >= :from`],
			[!!f.to, `p.submitted_at < :toNext`],
			[f.scorer !== null, `p.scorer_id = :scorer`],
			[f.battery !== null, `pr.battery_id = :battery`]
		],
		common(f)
	);
}

/** agreement_pairs g: the scorer filter matches either pass; kind does not apply. */
export function pairsWhere(f: AuditFilters, field: string | null, alias = 'g'): Where {
	const a = alias;
	return build(
		[
			[field !== null, `${a}.field = :field`],
			[!!f.from, `${a}.entered_at >= :from`],
			[!!f.to, `${a}.entered_at < :toNext`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.test !== null, `${a}.test_code = :test`],
			[f.scorer !== null, `(${a}.first_scorer_id = :scorer OR ${a}.second_scorer_id = :scorer)`]
		],
		{ ...common(f), field }
	);
}

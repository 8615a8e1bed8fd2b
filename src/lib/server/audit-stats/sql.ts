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

/**
 * audit_daily d (denominators). `passLevel`: the whole-pass rows (test_code '', passes.fields_entered)
 * unless a test is filtered, then that test's rows; otherwise the per-test rows. Kind never
 * restricts what was entered.
 */
export function dailyWhere(f: AuditFilters, level: 'pass' | 'tests', alias = 'd'): Where {
	const a = alias;
	return build(
		[
			[level === 'pass' && f.test === null, `${a}.test_code = ''`],
			[level === 'tests' && f.test === null, `${a}.test_code <> ''`],
			[f.test !== null, `${a}.test_code = :test`],
			[!!f.from, `${a}.day >= :from`],
			[!!f.to, `${a}.day <= :to`],
			[f.scorer !== null, `${a}.scorer_id = :scorer`],
			[f.battery !== null, `${a}.battery_id = :battery`]
		],
		{ ...common(f), to: f.to }
	);
}

/** agreement_daily s: scorer_id 0 holds every pair once, scorer_id s the pairs s entered a pass of. */
export function agreementDailyWhere(f: AuditFilters, alias = 's'): Where {
	const a = alias;
	return build(
		[
			[true, `${a}.scorer_id = :scorerKey`],
			[f.test !== null, `${a}.test_code = :test`],
			[!!f.from, `${a}.day >= :from`],
			[!!f.to, `${a}.day <= :to`],
			[f.battery !== null, `${a}.battery_id = :battery`]
		],
		{ ...common(f), to: f.to, scorerKey: f.scorer ?? 0 }
	);
}

/** agreement_pair_daily s for one field; the scorer filter matches either pass. */
export function pairDailyWhere(f: AuditFilters, alias = 's'): Where {
	const a = alias;
	return build(
		[
			[true, `${a}.field = :field`],
			[f.test !== null, `${a}.test_code = :test`],
			[!!f.from, `${a}.day >= :from`],
			[!!f.to, `${a}.day <= :to`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.scorer !== null, `(${a}.first_scorer_id = :scorer OR ${a}.second_scorer_id = :scorer)`]
		],
		{ ...common(f), to: f.to, field: f.field }
	);
}

/** agreement_pairs g (row level, Bland–Altman points) for one field; scorer matches either pass. */
export function pairsWhere(f: AuditFilters, field: string, alias = 'g'): Where {
	const a = alias;
	return build(
		[
			[true, `${a}.field = :field`],
			[!!f.from, `${a}.entered_at >= :from`],
			[!!f.to, `${a}.entered_at < :toNext`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.test !== null, `${a}.test_code = :test`],
			[f.scorer !== null, `(${a}.first_scorer_id = :scorer OR ${a}.second_scorer_id = :scorer)`]
		],
		{ ...common(f), field }
	);
}

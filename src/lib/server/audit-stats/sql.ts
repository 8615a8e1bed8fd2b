/**
 * WHERE clauses for the audit queries, one builder per source table, from the filters. Column
 * names are fixed here; only values go through replacements.
 */
import { dayAfter, type AuditFilters } from './filters';
import { addDays, mondayOf } from '../../dates';

/** The sums kept per agreement cell (agreement_daily, agreement_weekly, agreement_pair_daily). */
const AGREEMENT_MEASURES = ['pairs', 'one_sided', 'exact', 'sx', 'sy', 'sxx', 'syy', 'sxy', 'sd', 'sdd'] as const;

/** The four daily summaries (00006) and their `_delta` tables (00026): key, other and measure columns. */
export const SUMMARIES = {
	audit_daily: {
		keys: ['day', 'scorer_id', 'battery_id', 'test_code'],
		extra: ['domain'],
		measures: ['passes', 'fields_entered', 'raw_fields', 'derived_fields']
	},
	agreement_daily: { keys: ['scorer_id', 'day', 'battery_id', 'test_code', 'field', 'first_label', 'second_label'], extra: [], measures: AGREEMENT_MEASURES },
	agreement_weekly: { keys: ['scorer_id', 'week', 'battery_id', 'test_code', 'field', 'first_label', 'second_label'], extra: [], measures: AGREEMENT_MEASURES },
	agreement_pair_daily: {
		keys: ['field', 'day', 'first_scorer_id', 'second_scorer_id', 'battery_id', 'test_code', 'first_label', 'second_label'],
		extra: [],
		measures: AGREEMENT_MEASURES
	},
	/** The Bland–Altman plot pre-binned, whole range (00031): pairs both passes entered, per scorer (0 = all; s = either pass, once). */
	agreement_values: { keys: ['scorer_id', 'field', 'battery_id', 'test_code', 'first_value', 'second_value'], extra: [], measures: ['pairs'] }
} as const satisfies Record<string, { keys: readonly string[]; extra: readonly string[]; measures: readonly string[] }>;
export type SummaryTable = keyof typeof SUMMARIES;
export const SUMMARY_TABLES = Object.keys(SUMMARIES) as SummaryTable[];

/**
 * Whole-range totals (00031) kept by the fold with no delta table of their own: when `foldDeltas`
 * moves delta rows of `from` into it, it adds the same rows, grouped on `keys` (the summary's key
 * without its date), to the total in the same transaction. So at every moment a total plus the
 * delta rows of `from` not yet folded are the sums of every row, as `from` plus its delta rows are;
 * the reports read them that way when no date filter applies (`sumTotalWithDeltas`).
 */
export const TOTALS = {
	agreement_total: { from: 'agreement_weekly', keys: ['scorer_id', 'battery_id', 'test_code', 'field', 'first_label', 'second_label'] },
	agreement_pair_total: {
		from: 'agreement_pair_daily',
		keys: ['field', 'first_scorer_id', 'second_scorer_id', 'battery_id', 'test_code', 'first_label', 'second_label']
	}
} as const satisfies Record<string, { from: SummaryTable; keys: readonly string[] }>;
export type TotalTable = keyof typeof TOTALS;
export const TOTAL_TABLES = Object.keys(TOTALS) as TotalTable[];

/**
 * Sums over a summary and its delta rows not yet folded, filtered alike: each table is grouped on
 * its own (the summary through its indexes, as before the deltas), then the two results are added.
 * record.ts appends to the delta tables; the worker's fold moves rows across in one transaction, and
 * one statement sees either side of it. `groups` and `sums` are [name, expression on `alias`].
 */
export function sumWithDeltas(table: SummaryTable, where: Where, alias: string, groups: Array<[string, string]>, sums: Array<[string, string]>): string {
	return sumOfBoth(table, `${table}_delta`, where, alias, groups, sums);
}

/** `sumWithDeltas` over a whole-range total (TOTALS) and the delta rows of the summary it is folded from. */
export function sumTotalWithDeltas(table: TotalTable, where: Where, alias: string, groups: Array<[string, string]>, sums: Array<[string, string]>): string {
	return sumOfBoth(table, `${TOTALS[table].from}_delta`, where, alias, groups, sums);
}

function sumOfBoth(table: string, delta: string, where: Where, alias: string, groups: Array<[string, string]>, sums: Array<[string, string]>): string {
	const names = groups.map(([n]) => n).join(', ');
	const branch = (t: string) => `SELECT ${[...groups, ...sums].map(([n, e]) => `${e} AS ${n}`).join(', ')} FROM ${t} ${alias} ${where.sql} GROUP BY ${names}`;
	return `SELECT ${[...groups.map(([n]) => n), ...sums.map(([n]) => `SUM(${n}) AS ${n}`)].join(', ')}
	  FROM (${branch(table)} UNION ALL ${branch(delta)}) u GROUP BY ${names}`;
}

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

/**
 * agreement_daily / agreement_weekly s: scorer_id 0 holds every pair once, scorer_id s the pairs s
 * entered a pass of. `range` overrides the filter's dates (inclusive; on `col`).
 */
export function agreementDailyWhere(f: AuditFilters, range: { from: string | null; to: string | null } = f, col = 'day', alias = 's'): Where {
	const a = alias;
	return build(
		[
			[true, `${a}.scorer_id = :scorerKey`],
			[f.test !== null, `${a}.test_code = :test`],
			[!!range.from, `${a}.${col} >= :from`],
			[!!range.to, `${a}.${col} <= :to`],
			[f.battery !== null, `${a}.battery_id = :battery`]
		],
		{ ...common(f), from: range.from, to: range.to, scorerKey: f.scorer ?? 0 }
	);
}

/**
 * Split a date range into the whole ISO weeks inside it (week starts, inclusive; null = open) and
 * the edge days outside them, so whole weeks come from the weekly sums.
 */
export function splitRange(
	from: string | null,
	to: string | null
): { weeks: { from: string | null; to: string | null } | null; days: Array<{ from: string | null; to: string | null }> } {
	const firstWeek = from ? (mondayOf(from) === from ? from : addDays(mondayOf(from), 7)) : null;
	// the last week that ends on or before `to`
	const lastWeek = to ? (mondayOf(addDays(to, 1)) === addDays(to, 1) ? mondayOf(to) : addDays(mondayOf(to), -7)) : null;
	if (firstWeek && lastWeek && firstWeek > lastWeek) return { weeks: null, days: [{ from, to }] };
	const days: Array<{ from: string | null; to: string | null }> = [];
	if (from && firstWeek && from < firstWeek) days.push({ from, to: addDays(firstWeek, -1) });
	if (to && lastWeek && addDays(lastWeek, 7) <= to) days.push({ from: addDays(lastWeek, 7), to });
	return { weeks: { from: firstWeek, to: lastWeek }, days };
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

/** agreement_values v (the pre-binned Bland–Altman points, whole range) for one field: scorer_id 0 = every pair, s = pairs s entered either pass of. */
export function valuesWhere(f: AuditFilters, field: string, alias = 'v'): Where {
	const a = alias;
	return build(
		[
			[true, `${a}.scorer_id = :scorerKey`],
			[true, `${a}.field = :field`],
			[f.battery !== null, `${a}.battery_id = :battery`],
			[f.test !== null, `${a}.test_code = :test`]
		],
		{ ...common(f), field, scorerKey: f.scorer ?? 0 }
	);
}

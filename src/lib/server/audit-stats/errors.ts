/**
 * Error rates per scorer: errors attributed on resolution (error_events) per 100 fields entered,
 * with Wilson 95% intervals, overall and broken down by kind, test, domain, field class and ISO week.
 *
 * Denominators (from the daily sums in audit_daily):
 *   - overall, per kind, per week, with no test filter: the sum of passes.fields_entered of the
 *     scorer's submitted passes (the workflow's own count);
 *   - per test, per domain, per field class, and whenever a test is filtered: the fields that scorer
 *     entered on that test (counted from the pass's scores at submission).
 * A kind filter restricts the errors, never the fields entered (rate of that kind per 100 fields).
 */
import { select } from '../db';
import { errorRatePer100 } from '../../scoring/rates';
import { KINDS, kindName } from '../../scoring/kinds';
import type { AuditFilters } from './filters';
import { dailyWhere, errorWhere, sumWithDeltas } from './sql';
import type { RateCells, ScorerRow, KindRow, GroupRow, WeekRow } from '../../audit/types';
import { isoWeek, utcDay } from '../../dates';
import { COMPOSITE_DOMAIN, COMPOSITE_DOMAIN_NAME } from './record';

export type { RateCells, ScorerRow, KindRow, GroupRow, WeekRow };

export function rateCells(errors: number, fields: number): RateCells {
	const e = Number(errors) || 0;
	const n = Number(fields) || 0;
	if (n <= 0 || e > n) return { errors: e, fields: n, rate: n > 0 ? (100 * e) / n : null, ci_lower: null, ci_upper: null };
	const w = errorRatePer100(e, n)!;
	return { errors: e, fields: n, rate: w.per100.rate, ci_lower: w.per100.lower, ci_upper: w.per100.upper };
}

export interface Names {
	scorers: Map<number, string>;
	tests: Map<string, string>;
	domains: Map<string, string>;
}

export async function loadNames(): Promise<Names> {
	const [users, tests, composites, domains] = await Promise.all([
		select<{ id: number; name: string }>('SELECT id, name FROM users'),
		select<{ code: string; name: string }>('SELECT code, name FROM tests ORDER BY is_current ASC, version ASC'),
		// a composite's fields are recorded under its code, as a test's (the newest battery's name wins)
		select<{ code: string; name: string }>('SELECT code, name FROM composites ORDER BY id ASC'),
		select<{ code: string; name: string }>('SELECT code, name FROM domains')
	]);
	const testNames = new Map(composites.map((c) => [c.code, c.name]));
	for (const t of tests) testNames.set(t.code, t.name); // a test's name wins over a composite's of the same code
	return {
		scorers: new Map(users.map((u) => [Number(u.id), u.name])),
		tests: testNames,
		domains: new Map([[COMPOSITE_DOMAIN, COMPOSITE_DOMAIN_NAME], ...domains.map((d): [string, string] => [d.code, d.name])])
	};
}

type Key = string;
const num = (v: unknown) => Number(v ?? 0);

/** Fields entered, grouped by scorer (and optionally week), from audit_daily's whole-pass rows (or the test's rows under a test filter). */
async function fieldsByScorer(f: AuditFilters, byWeek: boolean): Promise<Map<Key, { fields: number; passes: number }>> {
	const out = new Map<Key, { fields: number; passes: number }>();
	const w = dailyWhere(f, 'pass');
	const week = byWeek ? 'DATE_SUB(d.day, INTERVAL WEEKDAY(d.day) DAY)' : 'NULL';
	const rows = await select<{ scorer_id: number; week: string | null; fields: number; passes: number }>(
		sumWithDeltas(
			'audit_daily',
			w,
			'd',
			[
				['scorer_id', 'd.scorer_id'],
				['week', week]
			],
			[
				['fields', 'SUM(d.fields_entered)'],
				['passes', 'SUM(d.passes)']
			]
		),
		w.params
	);
	for (const r of rows) out.set(`${r.scorer_id}|${r.week ?? ''}`, { fields: num(r.fields), passes: num(r.passes) });
	return out;
}

// ---------------------------------------------------------------------------------------------

/** Error rate per scorer, plus an "All scorers" row last. */
export async function scorerRates(f: AuditFilters, names: Names): Promise<ScorerRow[]> {
	const w = errorWhere(f);
	const [errs, fields] = await Promise.all([
		select<{ scorer_id: number; errors: number }>(`SELECT e.scorer_id, COUNT(*) AS errors FROM error_events e ${w.sql} GROUP BY e.scorer_id`, w.params),
		fieldsByScorer(f, false)
	]);
	const errors = new Map(errs.map((r) => [Number(r.scorer_id), num(r.errors)]));
	const ids = new Set<number>([...errors.keys(), ...[...fields.keys()].map((k) => Number(k.split('|')[0]))]);
	const rows: ScorerRow[] = [...ids].map((id) => {
		const d = fields.get(`${id}|`) ?? { fields: 0, passes: 0 };
		const e = errors.get(id) ?? 0;
		return {
			scorer_id: id,
			scorer: names.scorers.get(id) ?? `#${id}`,
			passes: d.passes,
			errors_per_protocol: d.passes > 0 ? e / d.passes : null,
			...rateCells(e, d.fields)
		};
	});
	rows.sort((a, b) => (b.rate ?? -1) - (a.rate ?? -1) || a.scorer.localeCompare(b.scorer));
	const tot = rows.reduce((s, r) => ({ e: s.e + r.errors, n: s.n + r.fields, p: s.p + r.passes }), { e: 0, n: 0, p: 0 });
	rows.push({
		scorer_id: null,
		scorer: 'All scorers',
		passes: tot.p,
		errors_per_protocol: tot.p > 0 ? tot.e / tot.p : null,
		...rateCells(tot.e, tot.n)
	});
	return rows;
}

/** Errors of each kind per scorer per 100 fields that scorer entered; "All scorers" rows too. */
export async function kindRates(f: AuditFilters, names: Names): Promise<KindRow[]> {
	const w = errorWhere(f);
	const [errs, fields] = await Promise.all([
		select<{ scorer_id: number; kind: string; errors: number }>(
			`SELECT e.scorer_id, e.kind, COUNT(*) AS errors FROM error_events e ${w.sql} GROUP BY e.scorer_id, e.kind`,
			w.params
		),
		fieldsByScorer(f, false)
	]);
	const scorerIds = [...new Set([...[...fields.keys()].map((k) => Number(k.split('|')[0])), ...errs.map((r) => Number(r.scorer_id))])];
	const count = new Map(errs.map((r) => [`${r.scorer_id}|${r.kind}`, num(r.errors)]));
	const kinds = f.kind
		? [f.kind]
		: ([...KINDS] as string[])
				.filter((k) => errs.some((r) => r.kind === k))
				.concat(errs.map((r) => r.kind).filter((k) => !(KINDS as readonly string[]).includes(k)));
	const uniqueKinds = [...new Set(kinds)];
	const totalFields = scorerIds.reduce((s, id) => s + (fields.get(`${id}|`)?.fields ?? 0), 0);
	const rows: KindRow[] = [];
	for (const kind of uniqueKinds) {
		let all = 0;
		for (const id of scorerIds) {
			const e = count.get(`${id}|${kind}`) ?? 0;
			all += e;
			rows.push({
				scorer_id: id,
				scorer: names.scorers.get(id) ?? `#${id}`,
				kind,
				kind_name: kindName(kind),
				...rateCells(e, fields.get(`${id}|`)?.fields ?? 0)
			});
		}
		rows.push({ scorer_id: null, scorer: 'All scorers', kind, kind_name: kindName(kind), ...rateCells(all, totalFields) });
	}
	return rows;
}

/** Per scorer × test, × domain or × field class (raw / derived), denominators from audit_daily's per-test rows. */
export async function groupRates(f: AuditFilters, names: Names, by: 'test' | 'domain' | 'class'): Promise<GroupRow[]> {
	const we = errorWhere(f);
	const wf = dailyWhere(f, 'tests');
	// the errors and the denominators are read at once; each errors query groups in the order of an
	// index (error_events_test starts test_code, scorer_id; the raw/derived split is two sums per
	// scorer), so MariaDB reads the index in order instead of sorting every event through a
	// temporary table (2-3 times faster at 89,000 events; issue 18)
	const errsQuery =
		by === 'test'
			? select<{ scorer_id: number; g: string; errors: number }>(
					`SELECT e.test_code AS g, e.scorer_id, COUNT(*) AS errors FROM error_events e ${we.sql} GROUP BY e.test_code, e.scorer_id`,
					we.params
				)
			: by === 'domain'
				? select<{ scorer_id: number; g: string; errors: number }>(
						`SELECT e.scorer_id, e.domain AS g, COUNT(*) AS errors FROM error_events e ${we.sql} GROUP BY e.scorer_id, g`,
						we.params
					)
				: select<{ scorer_id: number; raw: number; derived: number }>(
						`SELECT e.scorer_id, SUM(e.field = 'raw') AS raw, SUM(e.field <> 'raw') AS derived FROM error_events e ${we.sql} GROUP BY e.scorer_id`,
						we.params
					).then((rows) =>
						rows.flatMap((r) => (['derived', 'raw'] as const).filter((g) => num(r[g]) > 0).map((g) => ({ scorer_id: r.scorer_id, g, errors: num(r[g]) })))
					);
	const denomsQuery = async (): Promise<Array<{ scorer_id: number; g: string; fields: number }>> => {
		if (by === 'class') {
			const rows = await select<{ scorer_id: number; raw: number; derived: number }>(
				sumWithDeltas(
					'audit_daily',
					wf,
					'd',
					[['scorer_id', 'd.scorer_id']],
					[
						['raw', 'SUM(d.raw_fields)'],
						['derived', 'SUM(d.derived_fields)']
					]
				),
				wf.params
			);
			return rows.flatMap((r) => [
				{ scorer_id: r.scorer_id, g: 'raw', fields: num(r.raw) },
				{ scorer_id: r.scorer_id, g: 'derived', fields: num(r.derived) }
			]);
		}
		const col = by === 'test' ? 'd.test_code' : 'd.domain';
		return select(
			sumWithDeltas(
				'audit_daily',
				wf,
				'd',
				[
					['scorer_id', 'd.scorer_id'],
					['g', col]
				],
				[['fields', 'SUM(d.fields_entered)']]
			),
			wf.params
		);
	};
	const [errs, denoms] = await Promise.all([errsQuery, denomsQuery()]);
	const fields = new Map(denoms.map((r) => [`${r.scorer_id}|${r.g}`, num(r.fields)]));
	const count = new Map(errs.map((r) => [`${r.scorer_id}|${r.g}`, num(r.errors)]));
	const scorerIds = [...new Set([...denoms.map((r) => Number(r.scorer_id)), ...errs.map((r) => Number(r.scorer_id))])];
	const groups = [...new Set([...denoms.map((r) => r.g), ...errs.map((r) => r.g)])];
	const label = (g: string) =>
		by === 'test' ? (names.tests.get(g) ?? g) : by === 'domain' ? (names.domains.get(g) ?? g) : g === 'raw' ? 'Raw scores' : 'Derived scores';
	const rows: GroupRow[] = [];
	for (const g of groups) {
		let e = 0;
		let n = 0;
		for (const id of scorerIds) {
			const ge = count.get(`${id}|${g}`) ?? 0;
			const gn = fields.get(`${id}|${g}`) ?? 0;
			if (ge === 0 && gn === 0) continue;
			e += ge;
			n += gn;
			rows.push({ scorer_id: id, scorer: names.scorers.get(id) ?? `#${id}`, group: g, group_name: label(g), ...rateCells(ge, gn) });
		}
		rows.push({ scorer_id: null, scorer: 'All scorers', group: g, group_name: label(g), ...rateCells(e, n) });
	}
	rows.sort((a, b) => a.group_name.localeCompare(b.group_name) || (a.scorer_id === null ? 1 : b.scorer_id === null ? -1 : a.scorer.localeCompare(b.scorer)));
	return rows;
}

/** Weekly error rate per scorer (week of entering) and for all scorers. */
export async function weekRates(f: AuditFilters, names: Names): Promise<WeekRow[]> {
	const w = errorWhere(f);
	const [errs, fields] = await Promise.all([
		select<{ scorer_id: number; week: string; errors: number }>(
			`SELECT e.scorer_id, DATE_SUB(DATE(e.entered_at), INTERVAL WEEKDAY(e.entered_at) DAY) AS week, COUNT(*) AS errors
			   FROM error_events e ${w.sql} GROUP BY e.scorer_id, week`,
			w.params
		),
		fieldsByScorer(f, true)
	]);
	const count = new Map(errs.map((r) => [`${r.scorer_id}|${utcDay(r.week)}`, num(r.errors)]));
	const keys = new Set<string>([
		...count.keys(),
		...[...fields.keys()].map((k) => {
			const [id, wk] = k.split('|');
			return `${id}|${utcDay(wk)}`;
		})
	]);
	const fieldMap = new Map(
		[...fields].map(([k, v]) => {
			const [id, wk] = k.split('|');
			return [`${id}|${utcDay(wk)}`, v.fields];
		})
	);
	const rows: WeekRow[] = [];
	const totals = new Map<string, { e: number; n: number }>();
	for (const k of keys) {
		const [id, wk] = k.split('|');
		const e = count.get(k) ?? 0;
		const n = fieldMap.get(k) ?? 0;
		const t = totals.get(wk) ?? { e: 0, n: 0 };
		t.e += e;
		t.n += n;
		totals.set(wk, t);
		rows.push({ scorer_id: Number(id), scorer: names.scorers.get(Number(id)) ?? `#${id}`, week_start: wk, week: isoWeek(wk), ...rateCells(e, n) });
	}
	for (const [wk, t] of totals) rows.push({ scorer_id: null, scorer: 'All scorers', week_start: wk, week: isoWeek(wk), ...rateCells(t.e, t.n) });
	rows.sort((a, b) => a.week_start.localeCompare(b.week_start) || (a.scorer_id === null ? 1 : b.scorer_id === null ? -1 : a.scorer.localeCompare(b.scorer)));
	return rows;
}

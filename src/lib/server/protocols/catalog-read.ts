/** What the workflow reads from the catalog: a battery's tests (current versions) and norm groups. */
import { select, selectOne, jsonValue, type Tx } from '../db';
import type { TestDef, NormDef } from '../../scoring/reconcile';
import { groupCoverage, type NormGroupDef, type AgeRule } from '../../scoring/age';
import type { DerivedField, BoundsOverride } from '../../scoring/scales';

export interface TestRow {
	id: number;
	code: string;
	version: number;
	name: string;
	domain: string;
	domain_name: string;
	domain_position: number;
	unit: string;
	direction: 'higher_better' | 'lower_better';
	raw_min: number;
	raw_max: number;
	raw_decimals: number;
	reported: string;
	bounds: unknown;
	reliability: number | null;
}

export interface CatalogTest {
	id: number;
	code: string;
	version: number;
	name: string;
	domain: string;
	domainName: string;
	unit: string;
	direction: 'higher_better' | 'lower_better';
	raw: { min: number; max: number; decimals: number };
	reported: DerivedField[];
	bounds: BoundsOverride | null;
	reliability: number | null;
}

const ORDER: DerivedField[] = ['z', 'standard', 'scaled', 't', 'percentile'];

export function toCatalogTest(r: TestRow): CatalogTest {
	const reported = r.reported.split(',').map((s) => s.trim()).filter((s): s is DerivedField => (ORDER as string[]).includes(s));
	return {
		id: r.id,
		code: r.code,
		version: r.version,
		name: r.name,
		domain: r.domain,
		domainName: r.domain_name,
		unit: r.unit,
		direction: r.direction,
		raw: { min: Number(r.raw_min), max: Number(r.raw_max), decimals: Number(r.raw_decimals) },
		reported: ORDER.filter((f) => reported.includes(f)),
		bounds: (jsonValue<BoundsOverride | null>(r.bounds) ?? null) as BoundsOverride | null,
		reliability: r.reliability === null ? null : Number(r.reliability)
	};
}

export const engineTest = (t: CatalogTest): TestDef => ({ id: t.code, direction: t.direction, raw: t.raw, reported: t.reported, bounds: t.bounds });

const TEST_COLUMNS = `t.id, t.code, t.version, t.name, t.domain, d.name AS domain_name, d.position AS domain_position, t.unit, t.direction,
	t.raw_min, t.raw_max, t.raw_decimals, t.reported, t.bounds, t.reliability`;

/** The battery's tests at their current versions, in administration order. */
export async function batteryTests(batteryId: number, t?: Tx): Promise<CatalogTest[]> {
	const rows = await select<TestRow>(
		`SELECT ${TEST_COLUMNS} FROM battery_tests bt
		   JOIN tests t ON t.code = bt.test_code AND t.is_current = 1
		   JOIN domains d ON d.code = t.domain
		  WHERE bt.battery_id = :batteryId ORDER BY bt.position`,
		{ batteryId },
		t
	);
	return rows.map(toCatalogTest);
}

/** The tests a protocol was created with (frozen versions), in order, with the norm group chosen. */
export async function protocolTests(protocolId: number, t?: Tx): Promise<(CatalogTest & { position: number; groupId: number | null; groupCode: string | null; groupText: string; overrideReason: string | null })[]> {
	const rows = await select<TestRow & { position: number; norm_group_id: number | null; group_code: string | null; override_reason: string | null } & Pick<NormGroupRow, 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>>(
		`SELECT ${TEST_COLUMNS}, pt.position, pt.norm_group_id, ng.group_code, pt.override_reason,
		        ng.age_min_months, ng.age_max_months, ng.sex, ng.edu_min, ng.edu_max
		   FROM protocol_tests pt
		   JOIN tests t ON t.id = pt.test_id
		   JOIN domains d ON d.code = t.domain
		   LEFT JOIN norm_groups ng ON ng.id = pt.norm_group_id
		  WHERE pt.protocol_id = :protocolId ORDER BY pt.position`,
		{ protocolId },
		t
	);
	return rows.map((r) => ({
		...toCatalogTest(r),
		position: r.position,
		groupId: r.norm_group_id,
		groupCode: r.group_code,
		// what the group covers, for people ("ages 30;0–39;11, 13+ years of education")
		groupText: r.group_code === null ? '—' : groupCoverage(groupDef({ ...r, test_code: r.code, id: r.norm_group_id ?? 0, mean: 0, sd: 1, n: null } as NormGroupRow)),
		overrideReason: r.override_reason
	}));
}

export interface NormGroupRow {
	id: number;
	test_code: string;
	group_code: string;
	age_min_months: number;
	age_max_months: number;
	sex: 'F' | 'M' | null;
	edu_min: number | null;
	edu_max: number | null;
	mean: number;
	sd: number;
	n: number | null;
}

export async function normGroups(normSetId: number, testCodes: string[], t?: Tx): Promise<NormGroupRow[]> {
	if (testCodes.length === 0) return [];
	return select<NormGroupRow>(
		`SELECT id, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n
		   FROM norm_groups WHERE norm_set_id = :normSetId AND test_code IN (:testCodes) ORDER BY test_code, age_min_months`,
		{ normSetId, testCodes },
		t
	);
}

export const groupDef = (g: NormGroupRow): NormGroupDef => ({
	id: g.group_code,
	minMonths: g.age_min_months,
	maxMonths: g.age_max_months,
	...(g.sex ? { sex: g.sex } : {}),
	...(g.edu_min !== null || g.edu_max !== null ? { education: [g.edu_min ?? 0, g.edu_max ?? 99] as const } : {})
});

export const normDef = (g: NormGroupRow): NormDef => ({ test: g.test_code, group: g.group_code, mean: Number(g.mean), sd: Number(g.sd) });

export interface NormSetRow {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: unknown;
}

export async function normSet(id: number, t?: Tx): Promise<(NormSetRow & { rule: AgeRule }) | null> {
	const row = await selectOne<NormSetRow>('SELECT id, code, name, source, version, age_rule FROM norm_sets WHERE id = :id', { id }, t);
	if (!row) return null;
	const rule = jsonValue<Partial<AgeRule>>(row.age_rule) ?? {};
	return { ...row, rule: { borrowDays: rule.borrowDays === 'actual' ? 'actual' : 30, rounding: rule.rounding === 'round_days' ? 'round_days' : 'truncate', ...(rule.roundUpFromDay ? { roundUpFromDay: rule.roundUpFromDay } : {}) } };
}

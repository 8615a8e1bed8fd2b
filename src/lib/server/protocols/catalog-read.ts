/** What the workflow reads from the catalog: a battery's tests (current versions) and norm groups. */
import { select, selectOne, jsonValue, type Tx } from '../db';
import { models, type FrozenComposite } from '../models';
import { tableRowsOf, type TableRowInput } from '../catalog/norms';
import type { TestDef } from '../../scoring/reconcile';
import type { AnyNormEntry, CompositeDef, CompositeField } from '../../scoring/norms';
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
	const reported = r.reported
		.split(',')
		.map((s) => s.trim())
		.filter((s): s is DerivedField => (ORDER as string[]).includes(s));
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
export async function protocolTests(
	protocolId: number,
	t?: Tx
): Promise<
	(CatalogTest & {
		position: number;
		groupId: number | null;
		groupCode: string | null;
		groupText: string;
		overrideReason: string | null;
		normForm: string;
		normScale: string | null;
	})[]
> {
	const rows = await select<
		TestRow & {
			position: number;
			norm_group_id: number | null;
			group_code: string | null;
			override_reason: string | null;
			norm_form: string | null;
			norm_scale: string | null;
		} & Pick<NormGroupRow, 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>
	>(
		`SELECT ${TEST_COLUMNS}, pt.position, pt.norm_group_id, ng.group_code, pt.override_reason,
		        ng.age_min_months, ng.age_max_months, ng.sex, ng.edu_min, ng.edu_max, ng.form AS norm_form, ng.scale AS norm_scale
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
		groupText:
			r.group_code === null ? '—' : groupCoverage(groupDef({ ...r, test_code: r.code, id: r.norm_group_id ?? 0, mean: 0, sd: 1, n: null } as NormGroupRow)),
		overrideReason: r.override_reason,
		normForm: r.norm_form ?? 'mean_sd',
		normScale: r.norm_scale
	}));
}

export interface NormGroupRow {
	id: number;
	subject?: 'test' | 'composite';
	form?: 'mean_sd' | 'table' | 'regression';
	scale?: 'scaled' | 'standard' | 't' | 'percentile' | null;
	intercept?: number | null;
	coefficients?: unknown;
	/** Table rows (form `table`), in order. */
	rows?: TableRowInput[] | null;
	test_code: string;
	group_code: string;
	age_min_months: number;
	age_max_months: number;
	sex: 'F' | 'M' | null;
	edu_min: number | null;
	edu_max: number | null;
	mean: number | null;
	sd: number | null;
	n: number | null;
}

/** The groups of these tests (or composites) in a norm set, with their form and table rows. */
export async function normGroups(normSetId: number, testCodes: string[], t?: Tx): Promise<NormGroupRow[]> {
	if (testCodes.length === 0) return [];
	const rows = await select<NormGroupRow>(
		`SELECT id, subject, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, form, scale, intercept, coefficients, mean, sd, n
		   FROM norm_groups WHERE norm_set_id = :normSetId AND test_code IN (:testCodes) ORDER BY test_code, age_min_months`,
		{ normSetId, testCodes },
		t
	);
	const tables = await tableRowsOf(
		rows.filter((r) => r.form === 'table').map((r) => r.id),
		t
	);
	return rows.map((r) => ({ ...r, coefficients: jsonValue(r.coefficients) ?? null, rows: r.form === 'table' ? (tables.get(r.id) ?? []) : null }));
}

export const groupDef = (g: NormGroupRow): NormGroupDef => ({
	id: g.group_code,
	minMonths: g.age_min_months,
	maxMonths: g.age_max_months,
	...(g.sex ? { sex: g.sex } : {}),
	...(g.edu_min !== null || g.edu_max !== null ? { education: [g.edu_min ?? 0, g.edu_max ?? 99] as const } : {})
});

/**
 * A norm entry as the engine takes it (shared/spec/reconcile.md, "Norm forms"; types in
 * src/lib/scoring/norms.ts): mean/SD, a regression equation or a conversion table; a composite's
 * entries are keyed by `composite`, its table rows by `sum`.
 */
export function normDef(g: NormGroupRow): AnyNormEntry {
	const form = g.form ?? 'mean_sd';
	const pct = (p: string | null | undefined) => (p !== null && p !== undefined && p !== '' ? { percentile: /^\d+$/.test(p) ? Number(p) : p } : {});
	if (g.subject === 'composite') {
		if (form === 'table')
			return {
				composite: g.test_code,
				group: g.group_code,
				form: 'table',
				scale: g.scale!,
				rows: (g.rows ?? []).map((r) => ({ sum: [r.lo, r.hi] as const, score: r.score ?? undefined, ...pct(r.percentile) }))
			};
		return { composite: g.test_code, group: g.group_code, mean: Number(g.mean), sd: Number(g.sd) };
	}
	if (form === 'regression')
		return {
			test: g.test_code,
			group: g.group_code,
			form: 'regression',
			intercept: Number(g.intercept),
			coefficients: (g.coefficients ?? {}) as Record<string, number>,
			sd: Number(g.sd)
		};
	if (form === 'table') {
		const percentileOnly = g.scale === 'percentile';
		return {
			test: g.test_code,
			group: g.group_code,
			form: 'table',
			scale: g.scale!,
			rows: (g.rows ?? []).map((r) => ({ raw: [r.lo, r.hi] as const, ...(percentileOnly || r.score === null ? {} : { score: r.score }), ...pct(r.percentile) }))
		};
	}
	return { test: g.test_code, group: g.group_code, mean: Number(g.mean), sd: Number(g.sd) };
}

export interface CatalogComposite extends FrozenComposite {
	position: number;
	groupId: number | null;
	groupCode: string | null;
	groupText: string;
}

/** The battery's composites as defined now (what a new protocol freezes). */
export async function batteryComposites(batteryId: number, t?: Tx): Promise<FrozenComposite[]> {
	const { Composite } = models();
	const rows = await Composite.findAll({ where: { battery_id: batteryId }, order: [['position', 'ASC']], transaction: t ?? undefined });
	return rows.map((c) => ({
		code: c.code,
		name: c.name,
		parts: c.parts,
		part_field: c.part_field,
		reported: c.reported.split(',').filter(Boolean),
		reliability: c.reliability
	}));
}

/** The composites a protocol froze at creation, in report order, with their norm group. */
export async function protocolComposites(protocolId: number, t?: Tx): Promise<CatalogComposite[]> {
	const { ProtocolComposite } = models();
	const rows = await ProtocolComposite.findAll({ where: { protocol_id: protocolId }, order: [['position', 'ASC']], transaction: t ?? undefined });
	const ids = rows.map((r) => r.norm_group_id).filter((x): x is number => x !== null);
	type G = Pick<NormGroupRow, 'id' | 'group_code' | 'test_code' | 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>;
	const groups = ids.length
		? new Map(
				(
					await select<G>(
						'SELECT id, group_code, test_code, age_min_months, age_max_months, sex, edu_min, edu_max FROM norm_groups WHERE id IN (:ids)',
						{ ids },
						t
					)
				).map((g) => [g.id, g])
			)
		: new Map<number, G>();
	return rows.map((r) => {
		const g = r.norm_group_id ? groups.get(r.norm_group_id) : undefined;
		return {
			...r.definition,
			position: r.position,
			groupId: r.norm_group_id,
			groupCode: g?.group_code ?? null,
			// what the group covers, in words, as for tests ("ages 30;0–39;11")
			groupText: g ? groupCoverage(groupDef({ ...g, mean: 0, sd: 1, n: null } as NormGroupRow)) : '—'
		};
	});
}

export const engineComposite = (c: FrozenComposite): CompositeDef => ({
	id: c.code,
	parts: c.parts,
	part_field: c.part_field,
	reported: c.reported as CompositeField[]
});

export interface NormSetRow {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: unknown;
	covariate_age: 'whole_years' | 'decimal_years';
}

export async function normSet(id: number, t?: Tx): Promise<(NormSetRow & { rule: AgeRule }) | null> {
	const row = await selectOne<NormSetRow>('SELECT id, code, name, source, version, age_rule, covariate_age FROM norm_sets WHERE id = :id', { id }, t);
	if (!row) return null;
	const rule = jsonValue<Partial<AgeRule>>(row.age_rule) ?? {};
	return {
		...row,
		rule: {
			borrowDays: rule.borrowDays === 'actual' ? 'actual' : 30,
			rounding: rule.rounding === 'round_days' ? 'round_days' : 'truncate',
			...(rule.roundUpFromDay ? { roundUpFromDay: rule.roundUpFromDay } : {})
		}
	};
}

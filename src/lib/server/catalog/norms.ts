/**
 * Norm sets and their norm groups. For one test and one set of keys (sex, education band) the
 * groups' age ranges may neither overlap nor leave gaps; a change that would do so is refused with
 * the rows named. Groups a protocol was scored with cannot be changed or removed: make a new
 * version of the norm set instead.
 */
import { Op, fn, col, literal, type WhereOptions } from 'sequelize';
import { db, select, transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { ageRuleOf, normGroupSchema, normSetSchema, type NormGroupInput, type NormSetInput } from '../../catalog/schema';
import { rangeProblems, groupWords, type RangeRow } from '../../catalog/ranges';
import { SCALE_BOUNDS, sumSpan, tableProblems, type CovariateAge, type RawSpan, type TableRowInput } from '../../catalog/norm-forms';
import type { AnyNormEntry } from '../../scoring/norms';
import type { NormGroupDef, AgeRule } from '../../scoring/age';
import { models } from '../models';
import type { NormGroup, NormSet } from '../models/catalog';
import { ServiceError, notFoundError, parseWith } from '../errors';

export interface AgeRuleJson {
	borrowDays: 30 | 'actual';
	rounding: 'truncate' | 'round_days';
	roundUpFromDay?: number;
}

/** A norm set as stored. */
export interface NormSetBase {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: AgeRuleJson;
	/** How age enters regression norms. */
	covariate_age: CovariateAge;
	created_at: string;
}

/** A norm set with how many groups and tests it has (the catalog screens). */
export interface NormSetRecord extends NormSetBase {
	groups: number;
	tests: number;
}

export interface NormGroupRecord extends NormGroupInput {
	id: number;
	norm_set_id: number;
}
export type { TableRowInput };

const tx_ = (tx?: Tx) => tx ?? undefined;

/** The one mapper of a `norm_sets` row. */
function toNormSet(r: NormSet): NormSetBase {
	const rule = r.age_rule ?? {};
	return {
		id: r.id,
		code: r.code,
		name: r.name,
		source: r.source,
		version: r.version,
		age_rule: {
			borrowDays: rule.borrowDays === 'actual' ? 'actual' : 30,
			rounding: rule.rounding === 'round_days' ? 'round_days' : 'truncate',
			...(rule.roundUpFromDay ? { roundUpFromDay: rule.roundUpFromDay } : {})
		},
		covariate_age: r.covariate_age ?? 'whole_years',
		created_at: new Date(r.created_at).toISOString()
	};
}

/** The one mapper of a `norm_groups` row (with its table rows when its form is `table`). */
export function toGroup(r: NormGroup, rows: TableRowInput[] | null = null): NormGroupRecord {
	const n = (v: unknown) => (v === null || v === undefined ? null : Number(v));
	const form = r.form ?? 'mean_sd';
	return {
		id: r.id,
		norm_set_id: r.norm_set_id,
		test_code: r.test_code,
		subject: r.subject ?? 'test',
		form,
		scale: r.scale ?? null,
		intercept: n(r.intercept),
		coefficients: r.coefficients ?? null,
		rows: form === 'table' ? (rows ?? []) : null,
		group_code: r.group_code,
		age_min_months: Number(r.age_min_months),
		age_max_months: Number(r.age_max_months),
		sex: r.sex ?? null,
		edu_min: n(r.edu_min),
		edu_max: n(r.edu_max),
		mean: n(r.mean),
		sd: n(r.sd),
		n: n(r.n)
	};
}

/** The table rows of these groups, by group id, in order (norm group → table rows). */
export async function tableRowsOf(groupIds: number[], tx?: Tx): Promise<Map<number, TableRowInput[]>> {
	const out = new Map<number, TableRowInput[]>();
	if (!groupIds.length) return out;
	const { NormTableRow } = models();
	const rows = await NormTableRow.findAll({
		where: { norm_group_id: groupIds },
		order: [
			['norm_group_id', 'ASC'],
			['position', 'ASC']
		],
		transaction: tx_(tx)
	});
	for (const r of rows) {
		const list = out.get(r.norm_group_id) ?? [];
		list.push({ lo: Number(r.lo), hi: Number(r.hi), score: r.score, percentile: r.percentile });
		out.set(r.norm_group_id, list);
	}
	return out;
}

/** Map groups with their table rows (read only for the groups whose form is `table`). */
async function withRows(groups: NormGroup[], tx?: Tx): Promise<NormGroupRecord[]> {
	const rows = await tableRowsOf(
		groups.filter((g) => g.form === 'table').map((g) => g.id),
		tx
	);
	return groups.map((g) => toGroup(g, rows.get(g.id) ?? null));
}

/** Groups and tests per norm set (COUNT … GROUP BY). */
async function setCounts(ids: number[] | null, tx?: Tx): Promise<Map<number, { groups: number; tests: number }>> {
	const { NormGroup } = models();
	const rows = (await NormGroup.findAll({
		attributes: ['norm_set_id', [fn('COUNT', col('id')), 'groups'], [fn('COUNT', fn('DISTINCT', col('test_code'))), 'tests']],
		where: ids ? { norm_set_id: ids } : {},
		group: ['norm_set_id'],
		raw: true,
		transaction: tx_(tx)
	})) as unknown as { norm_set_id: number; groups: number; tests: number }[];
	return new Map(rows.map((r) => [Number(r.norm_set_id), { groups: Number(r.groups), tests: Number(r.tests) }]));
}

export async function listNormSets(tx?: Tx): Promise<NormSetRecord[]> {
	const { NormSet } = models();
	const [sets, counts] = await Promise.all([
		NormSet.findAll({
			order: [
				['name', 'ASC'],
				['version', 'ASC']
			],
			transaction: tx_(tx)
		}),
		setCounts(null, tx)
	]);
	return sets.map((s) => ({ ...toNormSet(s), groups: counts.get(s.id)?.groups ?? 0, tests: counts.get(s.id)?.tests ?? 0 }));
}

export async function getNormSet(id: number, tx?: Tx): Promise<NormSetRecord | null> {
	const s = await models().NormSet.findByPk(id, { transaction: tx_(tx) });
	if (!s) return null;
	const c = (await setCounts([id], tx)).get(id);
	return { ...toNormSet(s), groups: c?.groups ?? 0, tests: c?.tests ?? 0 };
}

/** A norm set as the workflow takes it: the stored set and its age rule for the engine. */
export async function normSet(id: number, tx?: Tx): Promise<(NormSetBase & { rule: AgeRule }) | null> {
	const s = await models().NormSet.findByPk(id, { transaction: tx_(tx) });
	if (!s) return null;
	const base = toNormSet(s);
	return { ...base, rule: base.age_rule };
}

/** The norm sets that norm a test: how many groups each has for it and the ages they cover. */
export async function normSetsOfTest(code: string): Promise<{ id: number; name: string; version: string; groups: number; min: number; max: number }[]> {
	const { NormGroup, NormSet } = models();
	// per norm set: COUNT, MIN, MAX … GROUP BY
	const spans = (await NormGroup.findAll({
		attributes: ['norm_set_id', [fn('COUNT', col('id')), 'groups'], [fn('MIN', col('age_min_months')), 'min'], [fn('MAX', col('age_max_months')), 'max']],
		where: { test_code: code },
		group: ['norm_set_id'],
		raw: true
	})) as unknown as { norm_set_id: number; groups: number; min: number; max: number }[];
	if (!spans.length) return [];
	const sets = new Map(
		(await NormSet.findAll({ attributes: ['id', 'name', 'version'], where: { id: spans.map((x) => x.norm_set_id) } })).map((x) => [x.id, x])
	);
	return spans
		.flatMap((x) => {
			const set = sets.get(Number(x.norm_set_id));
			return set ? [{ id: set.id, name: set.name, version: set.version, groups: Number(x.groups), min: Number(x.min), max: Number(x.max) }] : [];
		})
		.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : a.id - b.id));
}

/** Groups of a norm set in test (domain) order, then keys, then age. */
export async function listNormGroups(normSetId: number, opts: { test?: string } = {}, tx?: Tx): Promise<NormGroupRecord[]> {
	const { NormGroup, Test } = models();
	const groups = await NormGroup.findAll({ where: { norm_set_id: normSetId, ...(opts.test ? { test_code: opts.test } : {}) }, transaction: tx_(tx) });
	// the domain's position of each group's test (composites and unknown codes last)
	const tests = await Test.findAll({
		attributes: ['code', 'domain'],
		where: { is_current: true, code: [...new Set(groups.map((g) => g.test_code))] },
		include: [{ association: 'domainInfo', attributes: ['position'] }],
		transaction: tx_(tx)
	});
	const position = new Map(tests.map((t) => [t.code, t.domainInfo?.position ?? null]));
	// null last (a test without a domain) or first (a group for either sex, any education), as the screens list them
	const cmp = (a: string | number | null, b: string | number | null, nullFirst = false) =>
		a === b ? 0 : a === null ? (nullFirst ? -1 : 1) : b === null ? (nullFirst ? 1 : -1) : a < b ? -1 : 1;
	groups.sort(
		(a, b) =>
			cmp(position.get(a.test_code) ?? null, position.get(b.test_code) ?? null) ||
			cmp(a.test_code, b.test_code) ||
			cmp(a.sex, b.sex, true) ||
			cmp(a.edu_min === null ? null : Number(a.edu_min), b.edu_min === null ? null : Number(b.edu_min), true) ||
			a.age_min_months - b.age_min_months ||
			a.id - b.id
	);
	return withRows(groups, tx);
}

/** Groups with their table rows, read in one statement (norm group → table rows), in test and age order. */
async function groupsWithRows(where: WhereOptions<NormGroup>, tx?: Tx): Promise<NormGroupRecord[]> {
	const { NormGroup, NormTableRow } = models();
	const groups = await NormGroup.findAll({
		where,
		include: [{ association: 'tableRows', required: false }],
		order: [
			['test_code', 'ASC'],
			['age_min_months', 'ASC'],
			['id', 'ASC'],
			[{ model: NormTableRow, as: 'tableRows' }, 'position', 'ASC']
		],
		transaction: tx_(tx)
	});
	return groups.map((g) =>
		toGroup(g, g.form === 'table' ? (g.tableRows ?? []).map((r) => ({ lo: Number(r.lo), hi: Number(r.hi), score: r.score, percentile: r.percentile })) : null)
	);
}

/** The groups of these tests (or composites) in a norm set, with their form and table rows (the workflow's read). */
export async function normGroups(normSetId: number, testCodes: string[], tx?: Tx): Promise<NormGroupRecord[]> {
	if (testCodes.length === 0) return [];
	return groupsWithRows({ norm_set_id: normSetId, test_code: { [Op.in]: testCodes } }, tx);
}

/**
 * Every group of a protocol's tests and composites in its norm set (what `normGroups` gives for the
 * codes of `protocolTests` and `protocolComposites`), without reading those first: the codes come from
 * a subquery, so the second submit reads this beside the protocol's plan in one round trip.
 */
export async function protocolNormGroups(protocolId: number, normSetId: number, tx?: Tx): Promise<NormGroupRecord[]> {
	const id = Number(protocolId);
	if (!Number.isSafeInteger(id)) throw new Error(`protocolNormGroups: bad protocol id ${protocolId}`);
	// raw subquery: the protocol's frozen test versions' codes and its composites' codes (a UNION no association gives)
	const codes = literal(
		`(SELECT t.code FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = ${id} UNION SELECT pc.code FROM protocol_composites pc WHERE pc.protocol_id = ${id})`
	);
	return groupsWithRows({ norm_set_id: normSetId, test_code: { [Op.in]: codes } }, tx);
}

/** A group as the age rules take it (what it covers). */
export const groupDef = (g: Pick<NormGroupRecord, 'group_code' | 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>): NormGroupDef => ({
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
export function normDef(g: NormGroupRecord): AnyNormEntry {
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

function parseSet(input: unknown): NormSetInput {
	return parseWith(normSetSchema, input);
}

export async function createNormSet(input: unknown, actorId: number | null, tx?: Tx): Promise<NormSetRecord> {
	const s = parseSet(input);
	const run = async (tr: Tx) => {
		const { NormSet } = models();
		if (await NormSet.findOne({ attributes: ['id'], where: { code: s.code, version: s.version }, transaction: tx_(tr) }))
			throw new ServiceError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		const r = await NormSet.create(
			{ code: s.code, name: s.name, source: s.source, version: s.version, age_rule: ageRuleOf(s), covariate_age: s.covariate_age },
			{ transaction: tx_(tr) }
		);
		await recordEvent({ actorId, entity: 'norm_set', entityId: r.id, action: 'create', newValue: s }, tr);
		return (await getNormSet(r.id, tr))!;
	};
	return tx ? run(tx) : transaction(run);
}

export async function updateNormSet(id: number, input: unknown, actorId: number | null, tx?: Tx): Promise<NormSetRecord> {
	const s = parseSet(input);
	const run = async (tr: Tx) => {
		const old = await getNormSet(id, tr);
		if (!old) throw notFoundError('This norm set');
		const { NormSet } = models();
		const clash = await NormSet.findOne({ attributes: ['id'], where: { code: s.code, version: s.version, id: { [Op.ne]: id } }, transaction: tx_(tr) });
		if (clash) throw new ServiceError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		await NormSet.update(
			{ code: s.code, name: s.name, source: s.source, version: s.version, age_rule: ageRuleOf(s), covariate_age: s.covariate_age },
			{ where: { id }, transaction: tx_(tr) }
		);
		await recordEvent({ actorId, entity: 'norm_set', entityId: id, action: 'update', oldValue: old, newValue: s }, tr);
		return (await getNormSet(id, tr))!;
	};
	return tx ? run(tx) : transaction(run);
}

/**
 * The norm set's PUT: change its details and, with `groups`, replace the groups of every test named
 * in them, in ONE transaction: a refused group change (unknown test, overlapping ages, groups used
 * by a protocol) leaves the details as they were too.
 */
export async function updateNormSetWithGroups(
	id: number,
	meta: Partial<Record<keyof NormSetInput, unknown>>,
	groups: readonly NormGroupInput[] | undefined,
	actorId: number | null
): Promise<{ normSet: NormSetRecord; groups: NormGroupRecord[] }> {
	return transaction(async (tr) => {
		const current = await models().NormSet.findByPk(id, { attributes: ['id'], lock: true, transaction: tr });
		if (!current) throw notFoundError('This norm set');
		if (Object.keys(meta).length) {
			const now = (await getNormSet(id, tr))!;
			await updateNormSet(
				id,
				{
					code: now.code,
					name: now.name,
					source: now.source,
					version: now.version,
					borrow_days: String(now.age_rule.borrowDays),
					rounding: now.age_rule.rounding,
					covariate_age: now.covariate_age,
					...meta
				},
				actorId,
				tr
			);
		}
		if (groups) {
			// unknown test or composite codes and bad norm forms are refused by replaceNormGroups (checkForms)
			assertRanges(groups.map((g, i) => ({ ...g, label: `groups[${i}] (${g.group_code})` })));
			const r = await replaceNormGroups(
				id,
				groups.map((g, i) => ({ ...g, label: `groups[${i}] (${g.test_code} ${g.group_code})` })),
				tr
			);
			await recordEvent({ actorId, entity: 'norm_set', entityId: id, action: 'replace_groups', newValue: r }, tr);
		}
		return { normSet: (await getNormSet(id, tr))!, groups: await listNormGroups(id, {}, tr) };
	});
}

function parseGroup(input: unknown): NormGroupInput {
	return parseWith(normGroupSchema, input);
}

/** Refuse with the rows named when the groups of the given tests would overlap or leave gaps. */
export function assertRanges(rows: RangeRow[]): void {
	const problems = rangeProblems(rows);
	if (problems.length) {
		throw new ServiceError(422, problems.map((p) => p.message).join('\n'), { age_min_months: problems[0].message }, 'age_ranges');
	}
}

async function groupsInUse(ids: number[], tr: Tx): Promise<number> {
	if (!ids.length) return 0;
	// an aggregate over the protocol side's tables
	const [r] = await select<{ n: number }>(
		`SELECT COUNT(DISTINCT protocol_id) AS n FROM (SELECT protocol_id FROM protocol_tests WHERE norm_group_id IN (:ids)
		   UNION SELECT protocol_id FROM protocol_composites WHERE norm_group_id IN (:ids)) u`,
		{ ids },
		tr
	);
	return Number(r?.n ?? 0);
}

/** A group in messages, by what it covers (never its code). */
const label = (g: Parameters<typeof groupWords>[0]) => `the group for ${groupWords(g)}`;

interface Subject {
	subject: 'test' | 'composite';
	/** Valid raw values (a test) or sums (a composite). */
	span: RawSpan;
	bounds: Record<string, [number, number]> | null;
	reported: string[];
}

const DEFAULT_BOUNDS: Record<string, [number, number]> = { ...SCALE_BOUNDS, percentile: [1, 99], z: [-5, 5] };

/** What the norms of these codes must fit: the test's raw range or the composite's sum span. */
export async function subjectsOf(codes: string[], tr: Tx): Promise<Map<string, Subject>> {
	const out = new Map<string, Subject>();
	if (!codes.length) return out;
	const tests = await models().Test.findAll({
		attributes: ['code', 'raw_min', 'raw_max', 'raw_decimals', 'bounds', 'reported'],
		where: { is_current: true },
		transaction: tx_(tr)
	});
	const byCode = new Map(tests.map((t) => [t.code, t]));
	const boundsOf = (b: unknown) => (b ?? null) as Record<string, [number, number]> | null;
	for (const t of tests) {
		if (!codes.includes(t.code)) continue;
		out.set(t.code, {
			subject: 'test',
			span: { min: Number(t.raw_min), max: Number(t.raw_max), decimals: Number(t.raw_decimals) },
			bounds: boundsOf(t.bounds),
			reported: t.reported.split(',').map((x) => x.trim())
		});
	}
	const missing = codes.filter((c) => !out.has(c));
	if (missing.length) {
		const { Composite } = models();
		for (const c of await Composite.findAll({ where: { code: missing }, transaction: tr ?? undefined })) {
			const partBounds = c.parts.map((p) => {
				const t = byCode.get(p);
				return (t ? boundsOf(t.bounds)?.[c.part_field] : null) ?? DEFAULT_BOUNDS[c.part_field];
			});
			out.set(c.code, { subject: 'composite', span: sumSpan(partBounds), bounds: null, reported: c.reported.split(',') });
		}
	}
	return out;
}

/**
 * Each group fits its test or composite: the code exists, a table covers every raw value (or sum)
 * once with scores on its scale, a percentile-only test reports the percentile only. Refused with
 * the group and row named. Returns the groups with `subject` set from what the code is.
 */
export async function checkForms<G extends NormGroupInput>(groups: readonly (G & { label?: string })[], tr: Tx): Promise<G[]> {
	const subjects = await subjectsOf([...new Set(groups.map((g) => g.test_code))], tr);
	const problems: string[] = [];
	const out = groups.map((g) => {
		const name = g.label ?? `The group for ${groupWords(g)} of ${g.test_code}`;
		const s = subjects.get(g.test_code);
		if (!s) {
			problems.push(`${name}: unknown test or composite ${g.test_code}`);
			return g;
		}
		if (g.form === 'regression' && s.subject === 'composite') problems.push(`${name}: a composite is normed by mean/SD of its sum or by a sum table`);
		if (g.form === 'table' && g.scale && g.rows) {
			if (s.subject === 'composite' && g.scale === 'percentile') problems.push(`${name}: a composite table gives a score, not percentiles only`);
			if (s.subject === 'test' && g.scale === 'percentile' && s.reported.some((f) => f !== 'percentile'))
				problems.push(`${name}: a percentile-only table fits only a test that reports the percentile alone (${g.test_code} reports ${s.reported.join(', ')})`);
			const bounds = g.scale === 'percentile' ? null : (s.bounds?.[g.scale] ?? null);
			for (const p of tableProblems(g.rows, s.span, g.scale, bounds, s.subject === 'composite' ? 'sum' : 'raw'))
				problems.push(`${name}, ${p.message.charAt(0).toLowerCase()}${p.message.slice(1)}`);
		}
		return { ...g, subject: s.subject };
	});
	if (problems.length) {
		const shown = problems.slice(0, 20);
		throw new ServiceError(
			422,
			shown.join('\n') + (problems.length > shown.length ? `\n… and ${problems.length - shown.length} more` : ''),
			{ rows: shown[0] },
			'norm_form',
			{ problems: shown }
		);
	}
	return out as G[];
}

/** The group's columns as stored: only the fields its form uses. */
function formColumns(g: NormGroupInput) {
	return {
		...g,
		scale: g.form === 'table' ? g.scale : null,
		intercept: g.form === 'regression' ? g.intercept : null,
		coefficients: g.form === 'regression' && g.coefficients ? g.coefficients : null,
		mean: g.form === 'mean_sd' ? g.mean : null,
		sd: g.form === 'table' ? null : g.sd
	};
}

async function writeRows(groupId: number, g: NormGroupInput, tr: Tx): Promise<void> {
	if (g.form !== 'table' || !g.rows?.length) return;
	const { NormTableRow } = models();
	await NormTableRow.bulkCreate(
		g.rows.map((row, i) => ({
			norm_group_id: groupId,
			position: i + 1,
			lo: row.lo,
			hi: row.hi,
			score: g.scale === 'percentile' ? null : row.score,
			percentile: row.percentile
		})),
		{ transaction: tr ?? undefined }
	);
}

/** Insert one group and its table rows. */
async function insertGroup(normSetId: number, g: NormGroupInput, tr: Tx): Promise<number> {
	const { rows: _rows, ...columns } = formColumns(g);
	const r = await models().NormGroup.create({ norm_set_id: normSetId, ...columns }, { transaction: tx_(tr) });
	await writeRows(r.id, g, tr);
	return r.id;
}

/** Add one group; the test's groups with the same keys must stay contiguous. */
export async function addNormGroup(normSetId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	return transaction(async (tr) => {
		if (!(await models().NormSet.findByPk(normSetId, { attributes: ['id'], lock: true, transaction: tr }))) throw notFoundError('This norm set');
		const [checked] = await checkForms([g], tr);
		const existing = await listNormGroups(normSetId, { test: g.test_code }, tr);
		assertRanges([...existing.map((e) => ({ ...e, label: label(e) })), { ...checked, label: `the new group (${groupWords(checked)})` }]);
		const id = await insertGroup(normSetId, checked, tr);
		await recordEvent({ actorId, entity: 'norm_group', entityId: id, action: 'create', newValue: { norm_set_id: normSetId, ...checked } }, tr);
		return { id, norm_set_id: normSetId, ...checked };
	});
}

/** Change one group (saveNormGroup's path for a group that exists). */
async function updateNormGroup(groupId: number, g: NormGroupInput, actorId: number | null): Promise<NormGroupRecord> {
	return transaction(async (tr) => {
		const row = await models().NormGroup.findByPk(groupId, { lock: true, transaction: tr });
		if (!row) throw notFoundError('This norm group');
		const old = (await withRows([row], tr))[0];
		if (old.test_code !== g.test_code)
			throw new ServiceError(400, 'A norm group keeps its test.', { test_code: 'A group keeps its test; add a new group instead' });
		const [checked] = await checkForms([g], tr);
		const used = await groupsInUse([groupId], tr);
		if (used)
			throw new ServiceError(
				409,
				`The group for ${groupWords(old)} of ${old.test_code} was used by ${used} protocol(s); make a new version of the norm set instead.`,
				{},
				'in_use'
			);
		const others = (await listNormGroups(old.norm_set_id, { test: g.test_code }, tr)).filter((e) => e.id !== groupId);
		assertRanges([...others.map((e) => ({ ...e, label: label(e) })), { ...g, label: `the changed group (${groupWords(g)})` }]);
		const { rows: _rows, subject: _subject, test_code: _test, ...columns } = formColumns(checked);
		await row.update(columns, { transaction: tr });
		await models().NormTableRow.destroy({ where: { norm_group_id: groupId }, transaction: tr });
		await writeRows(groupId, checked, tr);
		await recordEvent({ actorId, entity: 'norm_group', entityId: groupId, action: 'update', oldValue: old, newValue: checked }, tr);
		return { id: groupId, norm_set_id: old.norm_set_id, ...checked };
	});
}

/** Remove a group. Only the youngest or oldest of a run may go (removing one inside would leave a gap). */
export async function deleteNormGroup(groupId: number, actorId: number | null): Promise<void> {
	await transaction(async (tr) => {
		const row = await models().NormGroup.findByPk(groupId, { lock: true, transaction: tr });
		if (!row) throw notFoundError('This norm group');
		const old = (await withRows([row], tr))[0];
		const used = await groupsInUse([groupId], tr);
		if (used)
			throw new ServiceError(409, `The group for ${groupWords(old)} of ${old.test_code} was used by ${used} protocol(s) and cannot be removed.`, {}, 'in_use');
		const others = (await listNormGroups(old.norm_set_id, { test: old.test_code }, tr)).filter((e) => e.id !== groupId);
		assertRanges(others.map((e) => ({ ...e, label: label(e) })));
		await row.destroy({ transaction: tr });
		await recordEvent({ actorId, entity: 'norm_group', entityId: groupId, action: 'delete', oldValue: old }, tr);
	});
}

/**
 * Replace the groups of the given tests in a norm set by `groups` (already validated), in the
 * caller's transaction. Refused when a protocol used any group being replaced.
 */
export async function replaceNormGroups(
	normSetId: number,
	input: readonly (NormGroupInput & { label?: string })[],
	tr: Tx
): Promise<{ removed: number; added: number }> {
	const groups = (await checkForms(input, tr)).map((g) => {
		const { label: _l, ...rest } = g as NormGroupInput & { label?: string };
		return rest as NormGroupInput;
	});
	const tests = [...new Set(groups.map((g) => g.test_code))];
	let removed = 0;
	if (tests.length) {
		const { NormGroup } = models();
		const where = { norm_set_id: normSetId, test_code: { [Op.in]: tests } };
		const old = await NormGroup.findAll({ attributes: ['id'], where, transaction: tx_(tr) });
		const used = await groupsInUse(
			old.map((o) => o.id),
			tr
		);
		if (used)
			throw new ServiceError(
				409,
				`This norm set's groups for these tests were used by ${used} protocol(s); import into a new version of the norm set instead.`,
				{},
				'in_use'
			);
		if (old.length) removed = await NormGroup.destroy({ where, transaction: tx_(tr) });
	}
	const esc = (v: unknown) => db().escape(v as string);
	// Plain mean/SD groups go in as hand-built multi-row INSERTs (a bulk insert: imports of up to 200,000
	// groups, no model instance per row); tables and equations one by one with their rows.
	const plain = groups.filter((g) => (g.form ?? 'mean_sd') === 'mean_sd');
	for (let i = 0; i < plain.length; i += 1000) {
		const values = plain
			.slice(i, i + 1000)
			.map(
				(g) =>
					`(${normSetId},${esc(g.subject ?? 'test')},${esc(g.test_code)},${esc(g.group_code)},${g.age_min_months},${g.age_max_months},${esc(g.sex)},${esc(g.edu_min)},${esc(g.edu_max)},${esc(g.mean)},${esc(g.sd)},${esc(g.n)})`
			)
			.join(',');
		await db().query(
			`INSERT INTO norm_groups (norm_set_id, subject, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n) VALUES ${values}`,
			{ transaction: tr ?? undefined }
		);
	}
	for (const g of groups) if ((g.form ?? 'mean_sd') !== 'mean_sd') await insertGroup(normSetId, g, tr);
	return { removed, added: groups.length };
}

/**
 * Save one group (the catalog's norm editor): replaces the group with the same test and code, or
 * adds it. Checked as every change is (form, coverage of a table, age ranges); refused when a
 * protocol used the group.
 */
export async function saveNormGroup(normSetId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	const existing = await models().NormGroup.findOne({
		attributes: ['id'],
		where: { norm_set_id: normSetId, test_code: g.test_code, group_code: g.group_code }
	});
	return existing ? updateNormGroup(existing.id, g, actorId) : addNormGroup(normSetId, g, actorId);
}

/**
 * Norm sets and their norm groups. For one test and one set of keys (sex, education band) the
 * groups' age ranges may neither overlap nor leave gaps; a change that would do so is refused with
 * the rows named. Groups a protocol was scored with cannot be changed or removed: make a new
 * version of the norm set instead.
 */
import { db, exec, select, selectOne, transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { ageRuleOf, normGroupSchema, normSetSchema, type NormGroupInput, type NormSetInput } from '../../catalog/schema';
import { rangeProblems, groupWords, type RangeRow } from '../../catalog/ranges';
import { SCALE_BOUNDS, sumSpan, tableProblems, type Coefficients, type CovariateAge, type RawSpan, type TableRowInput } from '../../catalog/norm-forms';
import { models } from '../models';
import { ServiceError, notFoundError, parseWith } from '../errors';

export interface AgeRuleJson {
	borrowDays: 30 | 'actual';
	rounding: 'truncate' | 'round_days';
	roundUpFromDay?: number;
}

export interface NormSetRecord {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: AgeRuleJson;
	/** How age enters regression norms. */
	covariate_age: CovariateAge;
	created_at: string;
	groups: number;
	tests: number;
}

export interface NormGroupRecord extends NormGroupInput {
	id: number;
	norm_set_id: number;
}
export type { TableRowInput };

interface SetRow {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: string | AgeRuleJson;
	covariate_age?: CovariateAge;
	created_at: Date;
	groups?: number;
	tests?: number;
}

function rowToSet(r: SetRow): NormSetRecord {
	return {
		id: r.id,
		code: r.code,
		name: r.name,
		source: r.source,
		version: r.version,
		age_rule: (typeof r.age_rule === 'string' ? JSON.parse(r.age_rule) : r.age_rule) as AgeRuleJson,
		covariate_age: r.covariate_age ?? 'whole_years',
		created_at: new Date(r.created_at).toISOString(),
		groups: Number(r.groups ?? 0),
		tests: Number(r.tests ?? 0)
	};
}

export function rowToGroup(r: Record<string, unknown>, rows: TableRowInput[] | null = null): NormGroupRecord {
	const n = (v: unknown) => (v === null || v === undefined ? null : Number(v));
	const form = (r.form as NormGroupRecord['form']) ?? 'mean_sd';
	return {
		id: Number(r.id),
		norm_set_id: Number(r.norm_set_id),
		test_code: String(r.test_code),
		subject: (r.subject as 'test' | 'composite') ?? 'test',
		form,
		scale: (r.scale as NormGroupRecord['scale']) ?? null,
		intercept: n(r.intercept),
		coefficients: r.coefficients ? ((typeof r.coefficients === 'string' ? JSON.parse(r.coefficients) : r.coefficients) as Coefficients) : null,
		rows: form === 'table' ? (rows ?? []) : null,
		group_code: String(r.group_code),
		age_min_months: Number(r.age_min_months),
		age_max_months: Number(r.age_max_months),
		sex: (r.sex as 'F' | 'M' | null) ?? null,
		edu_min: n(r.edu_min),
		edu_max: n(r.edu_max),
		mean: n(r.mean),
		sd: n(r.sd),
		n: n(r.n)
	};
}

/** The table rows of these groups, by group id, in order. */
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
		transaction: tx ?? undefined
	});
	for (const r of rows) {
		const list = out.get(r.norm_group_id) ?? [];
		list.push({ lo: Number(r.lo), hi: Number(r.hi), score: r.score, percentile: r.percentile });
		out.set(r.norm_group_id, list);
	}
	return out;
}

async function withRows(raw: Record<string, unknown>[], tx?: Tx): Promise<NormGroupRecord[]> {
	const ids = raw.filter((r) => r.form === 'table').map((r) => Number(r.id));
	const rows = await tableRowsOf(ids, tx);
	return raw.map((r) => rowToGroup(r, rows.get(Number(r.id)) ?? null));
}

const SET_SELECT = `SELECT s.*, COUNT(g.id) AS \`groups\`, COUNT(DISTINCT g.test_code) AS tests
	FROM norm_sets s LEFT JOIN norm_groups g ON g.norm_set_id = s.id`;

export async function listNormSets(tx?: Tx): Promise<NormSetRecord[]> {
	return (await select<SetRow>(`${SET_SELECT} GROUP BY s.id ORDER BY s.name, s.version`, {}, tx)).map(rowToSet);
}

export async function getNormSet(id: number, tx?: Tx): Promise<NormSetRecord | null> {
	const r = await selectOne<SetRow>(`${SET_SELECT} WHERE s.id = :id GROUP BY s.id`, { id }, tx);
	return r ? rowToSet(r) : null;
}

/** Groups of a norm set in test (domain) order, then keys, then age. */
export async function listNormGroups(normSetId: number, opts: { test?: string } = {}, tx?: Tx): Promise<NormGroupRecord[]> {
	const rows = await select<Record<string, unknown>>(
		`SELECT g.* FROM norm_groups g
		   LEFT JOIN tests t ON t.code = g.test_code AND t.is_current = 1 LEFT JOIN domains d ON d.code = t.domain
		  WHERE g.norm_set_id = :id ${opts.test ? 'AND g.test_code = :test' : ''}
		  ORDER BY d.position IS NULL, d.position, g.test_code, g.sex IS NOT NULL, g.sex, g.edu_min IS NOT NULL, g.edu_min, g.age_min_months, g.id`,
		{ id: normSetId, test: opts.test ?? null },
		tx
	);
	return withRows(rows, tx);
}

function parseSet(input: unknown): NormSetInput {
	return parseWith(normSetSchema, input);
}

export async function createNormSet(input: unknown, actorId: number | null, tx?: Tx): Promise<NormSetRecord> {
	const s = parseSet(input);
	const run = async (tr: Tx) => {
		if (await selectOne('SELECT id FROM norm_sets WHERE code = :code AND version = :version', s, tr))
			throw new ServiceError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		const r = await exec(
			'INSERT INTO norm_sets (code, name, source, version, age_rule, covariate_age) VALUES (:code, :name, :source, :version, :rule, :covariate_age)',
			{ ...s, rule: JSON.stringify(ageRuleOf(s)) },
			tr
		);
		await recordEvent({ actorId, entity: 'norm_set', entityId: r.insertId, action: 'create', newValue: s }, tr);
		return (await getNormSet(r.insertId, tr))!;
	};
	return tx ? run(tx) : transaction(run);
}

export async function updateNormSet(id: number, input: unknown, actorId: number | null, tx?: Tx): Promise<NormSetRecord> {
	const s = parseSet(input);
	const run = async (tr: Tx) => {
		const old = await getNormSet(id, tr);
		if (!old) throw notFoundError('This norm set');
		const clash = await selectOne('SELECT id FROM norm_sets WHERE code = :code AND version = :version AND id <> :id', { ...s, id }, tr);
		if (clash) throw new ServiceError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		await exec(
			'UPDATE norm_sets SET code = :code, name = :name, source = :source, version = :version, age_rule = :rule, covariate_age = :covariate_age WHERE id = :id',
			{ ...s, rule: JSON.stringify(ageRuleOf(s)), id },
			tr
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
		const current = await selectOne<{ id: number }>('SELECT id FROM norm_sets WHERE id = :id FOR UPDATE', { id }, tr);
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
	const r = await selectOne<{ n: number }>(
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
	const tests = await select<{ code: string; raw_min: number; raw_max: number; raw_decimals: number; bounds: unknown; reported: string }>(
		'SELECT code, raw_min, raw_max, raw_decimals, bounds, reported FROM tests WHERE is_current = 1',
		{},
		tr
	);
	const byCode = new Map(tests.map((t) => [t.code, t]));
	const boundsOf = (b: unknown) => (b ? (typeof b === 'string' ? JSON.parse(b) : b) : null) as Record<string, [number, number]> | null;
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
		coefficients: g.form === 'regression' && g.coefficients ? JSON.stringify(g.coefficients) : null,
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
	const r = await exec(
		`INSERT INTO norm_groups (norm_set_id, subject, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, form, scale, intercept, coefficients, mean, sd, n)
		 VALUES (:ns, :subject, :test_code, :group_code, :age_min_months, :age_max_months, :sex, :edu_min, :edu_max, :form, :scale, :intercept, :coefficients, :mean, :sd, :n)`,
		{ ns: normSetId, ...formColumns(g) },
		tr
	);
	await writeRows(r.insertId, g, tr);
	return r.insertId;
}

/** Add one group; the test's groups with the same keys must stay contiguous. */
export async function addNormGroup(normSetId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	return transaction(async (tr) => {
		if (!(await selectOne('SELECT id FROM norm_sets WHERE id = :id FOR UPDATE', { id: normSetId }, tr))) throw notFoundError('This norm set');
		const [checked] = await checkForms([g], tr);
		const existing = await listNormGroups(normSetId, { test: g.test_code }, tr);
		assertRanges([...existing.map((e) => ({ ...e, label: label(e) })), { ...checked, label: `the new group (${groupWords(checked)})` }]);
		const id = await insertGroup(normSetId, checked, tr);
		await recordEvent({ actorId, entity: 'norm_group', entityId: id, action: 'create', newValue: { norm_set_id: normSetId, ...checked } }, tr);
		return { id, norm_set_id: normSetId, ...checked };
	});
}

export async function updateNormGroup(groupId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	return transaction(async (tr) => {
		const row = await selectOne<Record<string, unknown>>('SELECT * FROM norm_groups WHERE id = :id FOR UPDATE', { id: groupId }, tr);
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
		await exec(
			`UPDATE norm_groups SET group_code = :group_code, age_min_months = :age_min_months, age_max_months = :age_max_months, sex = :sex,
			        edu_min = :edu_min, edu_max = :edu_max, form = :form, scale = :scale, intercept = :intercept, coefficients = :coefficients,
			        mean = :mean, sd = :sd, n = :n WHERE id = :id`,
			{ ...formColumns(checked), id: groupId },
			tr
		);
		await exec('DELETE FROM norm_table_rows WHERE norm_group_id = :id', { id: groupId }, tr);
		await writeRows(groupId, checked, tr);
		await recordEvent({ actorId, entity: 'norm_group', entityId: groupId, action: 'update', oldValue: old, newValue: checked }, tr);
		return { id: groupId, norm_set_id: old.norm_set_id, ...checked };
	});
}

/** Remove a group. Only the youngest or oldest of a run may go (removing one inside would leave a gap). */
export async function deleteNormGroup(groupId: number, actorId: number | null): Promise<void> {
	await transaction(async (tr) => {
		const row = await selectOne<Record<string, unknown>>('SELECT * FROM norm_groups WHERE id = :id FOR UPDATE', { id: groupId }, tr);
		if (!row) throw notFoundError('This norm group');
		const old = (await withRows([row], tr))[0];
		const used = await groupsInUse([groupId], tr);
		if (used)
			throw new ServiceError(409, `The group for ${groupWords(old)} of ${old.test_code} was used by ${used} protocol(s) and cannot be removed.`, {}, 'in_use');
		const others = (await listNormGroups(old.norm_set_id, { test: old.test_code }, tr)).filter((e) => e.id !== groupId);
		assertRanges(others.map((e) => ({ ...e, label: label(e) })));
		await exec('DELETE FROM norm_groups WHERE id = :id', { id: groupId }, tr);
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
		const old = await select<{ id: number }>('SELECT id FROM norm_groups WHERE norm_set_id = :ns AND test_code IN (:tests)', { ns: normSetId, tests }, tr);
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
		if (old.length) removed = (await exec('DELETE FROM norm_groups WHERE norm_set_id = :ns AND test_code IN (:tests)', { ns: normSetId, tests }, tr)).affected;
	}
	const esc = (v: unknown) => db().escape(v as string);
	// Plain mean/SD groups go in as multi-row INSERTs (large imports); tables and equations one by one with their rows.
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
	const existing = await selectOne<{ id: number }>('SELECT id FROM norm_groups WHERE norm_set_id = :ns AND test_code = :test AND group_code = :group', {
		ns: normSetId,
		test: g.test_code,
		group: g.group_code
	});
	return existing ? updateNormGroup(existing.id, g, actorId) : addNormGroup(normSetId, g, actorId);
}

/**
 * Norm sets and their norm groups. For one test and one set of keys (sex, education band) the
 * groups' age ranges may neither overlap nor leave gaps; a change that would do so is refused with
 * the rows named. Groups a protocol was scored with cannot be changed or removed: make a new
 * version of the norm set instead.
 */
import { db, exec, select, selectOne, transaction, type Tx } from '../db';
import { audit } from '../audit';
import { ageRuleOf, normGroupSchema, normSetSchema, type NormGroupInput, type NormSetInput } from '../../catalog/schema';
import { rangeProblems, type RangeRow } from '../../catalog/ranges';
import { CatalogError, notFoundError } from './errors';

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
	created_at: string;
	groups: number;
	tests: number;
}

export interface NormGroupRecord extends NormGroupInput {
	id: number;
	norm_set_id: number;
}

interface SetRow {
	id: number;
	code: string;
	name: string;
	source: string;
	version: string;
	age_rule: string | AgeRuleJson;
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
		created_at: new Date(r.created_at).toISOString(),
		groups: Number(r.groups ?? 0),
		tests: Number(r.tests ?? 0)
	};
}

export function rowToGroup(r: Record<string, unknown>): NormGroupRecord {
	const n = (v: unknown) => (v === null || v === undefined ? null : Number(v));
	return {
		id: Number(r.id),
		norm_set_id: Number(r.norm_set_id),
		test_code: String(r.test_code),
		group_code: String(r.group_code),
		age_min_months: Number(r.age_min_months),
		age_max_months: Number(r.age_max_months),
		sex: (r.sex as 'F' | 'M' | null) ?? null,
		edu_min: n(r.edu_min),
		edu_max: n(r.edu_max),
		mean: Number(r.mean),
		sd: Number(r.sd),
		n: n(r.n)
	};
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
	return rows.map(rowToGroup);
}

function parseSet(input: unknown): NormSetInput {
	const p = normSetSchema.safeParse(input);
	if (!p.success) {
		const fields: Record<string, string> = {};
		for (const i of p.error.issues) fields[i.path.join('.') || 'form'] ??= i.message;
		throw new CatalogError(400, 'Some fields need correcting.', fields);
	}
	return p.data;
}

export async function createNormSet(input: unknown, actorId: number | null, tx?: Tx): Promise<NormSetRecord> {
	const s = parseSet(input);
	const run = async (tr: Tx) => {
		if (await selectOne('SELECT id FROM norm_sets WHERE code = :code AND version = :version', s, tr))
			throw new CatalogError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		const r = await exec(
			'INSERT INTO norm_sets (code, name, source, version, age_rule) VALUES (:code, :name, :source, :version, :rule)',
			{ ...s, rule: JSON.stringify(ageRuleOf(s)) },
			tr
		);
		await audit({ actorId, entity: 'norm_set', entityId: r.insertId, action: 'create', newValue: s }, tr);
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
		if (clash) throw new CatalogError(409, 'That norm set version already exists.', { version: `${s.code} version ${s.version} already exists` }, 'conflict');
		await exec('UPDATE norm_sets SET code = :code, name = :name, source = :source, version = :version, age_rule = :rule WHERE id = :id', { ...s, rule: JSON.stringify(ageRuleOf(s)), id }, tr);
		await audit({ actorId, entity: 'norm_set', entityId: id, action: 'update', oldValue: old, newValue: s }, tr);
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
				{ code: now.code, name: now.name, source: now.source, version: now.version, borrow_days: String(now.age_rule.borrowDays), rounding: now.age_rule.rounding, ...meta },
				actorId,
				tr
			);
		}
		if (groups) {
			const known = new Set((await select<{ code: string }>('SELECT code FROM tests WHERE is_current = 1', {}, tr)).map((t) => t.code));
			const unknown = [...new Set(groups.map((g) => g.test_code))].filter((c) => !known.has(c));
			if (unknown.length) throw new CatalogError(400, `Unknown test code: ${unknown.join(', ')}`, { groups: `Unknown test code: ${unknown.join(', ')}` });
			assertRanges(groups.map((g, i) => ({ ...g, label: `groups[${i}] (${g.group_code})` })));
			const r = await replaceNormGroups(id, groups, tr);
			await audit({ actorId, entity: 'norm_set', entityId: id, action: 'replace_groups', newValue: r }, tr);
		}
		return { normSet: (await getNormSet(id, tr))!, groups: await listNormGroups(id, {}, tr) };
	});
}

function parseGroup(input: unknown): NormGroupInput {
	const p = normGroupSchema.safeParse(input);
	if (!p.success) {
		const fields: Record<string, string> = {};
		for (const i of p.error.issues) fields[i.path.join('.') || 'form'] ??= i.message;
		throw new CatalogError(400, 'Some fields need correcting.', fields);
	}
	return p.data;
}

/** Refuse with the rows named when the groups of the given tests would overlap or leave gaps. */
export function assertRanges(rows: RangeRow[]): void {
	const problems = rangeProblems(rows);
	if (problems.length) {
		throw new CatalogError(422, problems.map((p) => p.message).join('\n'), { age_min_months: problems[0].message }, 'age_ranges');
	}
}

async function groupsInUse(ids: number[], tr: Tx): Promise<number> {
	if (!ids.length) return 0;
	const r = await selectOne<{ n: number }>('SELECT COUNT(DISTINCT protocol_id) AS n FROM protocol_tests WHERE norm_group_id IN (:ids)', { ids }, tr);
	return Number(r?.n ?? 0);
}

const label = (g: { id?: number; group_code: string }) => `group ${g.group_code}`;

async function checkTest(code: string, tr: Tx) {
	if (!(await selectOne('SELECT id FROM tests WHERE code = :code AND is_current = 1', { code }, tr)))
		throw new CatalogError(400, 'Unknown test.', { test_code: `Unknown test code ${code}` });
}

/** Add one group; the test's groups with the same keys must stay contiguous. */
export async function addNormGroup(normSetId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	return transaction(async (tr) => {
		if (!(await selectOne('SELECT id FROM norm_sets WHERE id = :id FOR UPDATE', { id: normSetId }, tr))) throw notFoundError('This norm set');
		await checkTest(g.test_code, tr);
		const existing = await listNormGroups(normSetId, { test: g.test_code }, tr);
		assertRanges([...existing.map((e) => ({ ...e, label: label(e) })), { ...g, label: `the new group ${g.group_code}` }]);
		const r = await exec(
			`INSERT INTO norm_groups (norm_set_id, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n)
			 VALUES (:ns, :test_code, :group_code, :age_min_months, :age_max_months, :sex, :edu_min, :edu_max, :mean, :sd, :n)`,
			{ ns: normSetId, ...g },
			tr
		);
		await audit({ actorId, entity: 'norm_group', entityId: r.insertId, action: 'create', newValue: { norm_set_id: normSetId, ...g } }, tr);
		return { id: r.insertId, norm_set_id: normSetId, ...g };
	});
}

export async function updateNormGroup(groupId: number, input: unknown, actorId: number | null): Promise<NormGroupRecord> {
	const g = parseGroup(input);
	return transaction(async (tr) => {
		const row = await selectOne<Record<string, unknown>>('SELECT * FROM norm_groups WHERE id = :id FOR UPDATE', { id: groupId }, tr);
		if (!row) throw notFoundError('This norm group');
		const old = rowToGroup(row);
		if (old.test_code !== g.test_code) throw new CatalogError(400, 'A norm group keeps its test.', { test_code: 'A group keeps its test; add a new group instead' });
		const used = await groupsInUse([groupId], tr);
		if (used) throw new CatalogError(409, `Group ${old.group_code} of ${old.test_code} was used by ${used} protocol(s); make a new version of the norm set instead.`, {}, 'in_use');
		const others = (await listNormGroups(old.norm_set_id, { test: g.test_code }, tr)).filter((e) => e.id !== groupId);
		assertRanges([...others.map((e) => ({ ...e, label: label(e) })), { ...g, label: `the changed group ${g.group_code}` }]);
		await exec(
			`UPDATE norm_groups SET group_code = :group_code, age_min_months = :age_min_months, age_max_months = :age_max_months, sex = :sex,
			        edu_min = :edu_min, edu_max = :edu_max, mean = :mean, sd = :sd, n = :n WHERE id = :id`,
			{ ...g, id: groupId },
			tr
		);
		await audit({ actorId, entity: 'norm_group', entityId: groupId, action: 'update', oldValue: old, newValue: g }, tr);
		return { id: groupId, norm_set_id: old.norm_set_id, ...g };
	});
}

/** Remove a group. Only the youngest or oldest of a run may go (removing one inside would leave a gap). */
export async function deleteNormGroup(groupId: number, actorId: number | null): Promise<void> {
	await transaction(async (tr) => {
		const row = await selectOne<Record<string, unknown>>('SELECT * FROM norm_groups WHERE id = :id FOR UPDATE', { id: groupId }, tr);
		if (!row) throw notFoundError('This norm group');
		const old = rowToGroup(row);
		const used = await groupsInUse([groupId], tr);
		if (used) throw new CatalogError(409, `Group ${old.group_code} of ${old.test_code} was used by ${used} protocol(s) and cannot be removed.`, {}, 'in_use');
		const others = (await listNormGroups(old.norm_set_id, { test: old.test_code }, tr)).filter((e) => e.id !== groupId);
		assertRanges(others.map((e) => ({ ...e, label: label(e) })));
		await exec('DELETE FROM norm_groups WHERE id = :id', { id: groupId }, tr);
		await audit({ actorId, entity: 'norm_group', entityId: groupId, action: 'delete', oldValue: old }, tr);
	});
}

/**
 * Replace the groups of the given tests in a norm set by `groups` (already validated), in the
 * caller's transaction. Refused when a protocol used any group being replaced.
 */
export async function replaceNormGroups(normSetId: number, groups: readonly NormGroupInput[], tr: Tx): Promise<{ removed: number; added: number }> {
	const tests = [...new Set(groups.map((g) => g.test_code))];
	let removed = 0;
	if (tests.length) {
		const old = await select<{ id: number }>('SELECT id FROM norm_groups WHERE norm_set_id = :ns AND test_code IN (:tests)', { ns: normSetId, tests }, tr);
		const used = await groupsInUse(old.map((o) => o.id), tr);
		if (used) throw new CatalogError(409, `This norm set's groups for these tests were used by ${used} protocol(s); import into a new version of the norm set instead.`, {}, 'in_use');
		if (old.length) removed = (await exec('DELETE FROM norm_groups WHERE norm_set_id = :ns AND test_code IN (:tests)', { ns: normSetId, tests }, tr)).affected;
	}
	const esc = (v: unknown) => db().escape(v as string);
	for (let i = 0; i < groups.length; i += 1000) {
		const values = groups
			.slice(i, i + 1000)
			.map((g) => `(${normSetId},${esc(g.test_code)},${esc(g.group_code)},${g.age_min_months},${g.age_max_months},${esc(g.sex)},${esc(g.edu_min)},${esc(g.edu_max)},${esc(g.mean)},${esc(g.sd)},${esc(g.n)})`)
			.join(',');
		await db().query(
			`INSERT INTO norm_groups (norm_set_id, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n) VALUES ${values}`,
			{ transaction: tr ?? undefined }
		);
	}
	return { removed, added: groups.length };
}

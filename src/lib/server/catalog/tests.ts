/**
 * Tests of the catalog, versioned: a change that alters scores of a test a verified protocol was
 * scored with makes a new version (the old one stays, no longer current); any other change is made
 * in place. Name, unit, domain and notes never make a version.
 */
import { exec, select, selectOne, transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { canonicalReported, testInputSchema, type Bounds, type Derived, type TestInput } from '../../catalog/schema';
import { ServiceError, notFoundError, parseWith } from '../errors';

export interface TestRecord extends TestInput {
	id: number;
	version: number;
	is_current: boolean;
	created_at: string;
}

interface TestRow {
	id: number;
	code: string;
	version: number;
	is_current: number;
	name: string;
	domain: string;
	unit: string;
	direction: 'higher_better' | 'lower_better';
	raw_min: number;
	raw_max: number;
	raw_decimals: number;
	reported: string;
	bounds: string | Bounds | null;
	reliability: number | null;
	notes: string | null;
	created_at: Date;
}

export function rowToTest(r: TestRow): TestRecord {
	return {
		id: r.id,
		code: r.code,
		version: r.version,
		is_current: !!r.is_current,
		name: r.name,
		domain: r.domain,
		unit: r.unit,
		direction: r.direction,
		raw: { min: Number(r.raw_min), max: Number(r.raw_max), decimals: Number(r.raw_decimals) },
		reported: canonicalReported(r.reported.split(',')),
		bounds: r.bounds ? ((typeof r.bounds === 'string' ? JSON.parse(r.bounds) : r.bounds) as Bounds) : null,
		reliability: r.reliability === null ? null : Number(r.reliability),
		notes: r.notes,
		created_at: new Date(r.created_at).toISOString()
	};
}

const ORDER = 'ORDER BY d.position, t.domain, t.code';

/** Current versions of all tests, in domain order. */
export async function listTests(opts: { domain?: string } = {}, tx?: Tx): Promise<TestRecord[]> {
	const rows = await select<TestRow>(
		`SELECT t.* FROM tests t JOIN domains d ON d.code = t.domain WHERE t.is_current = 1 ${opts.domain ? 'AND t.domain = :domain' : ''} ${ORDER}`,
		{ domain: opts.domain ?? null },
		tx
	);
	return rows.map(rowToTest);
}

export async function getTest(code: string, tx?: Tx): Promise<TestRecord | null> {
	const r = await selectOne<TestRow>('SELECT * FROM tests WHERE code = :code AND is_current = 1', { code }, tx);
	return r ? rowToTest(r) : null;
}

export async function getTestVersion(id: number, tx?: Tx): Promise<TestRecord | null> {
	const r = await selectOne<TestRow>('SELECT * FROM tests WHERE id = :id', { id }, tx);
	return r ? rowToTest(r) : null;
}

/** Every version of a test, newest first, with how many protocols use each. */
export async function testVersions(code: string): Promise<(TestRecord & { protocols: number; verified: number })[]> {
	const rows = await select<TestRow & { protocols: number; verified: number }>(
		`SELECT t.*, COUNT(DISTINCT pt.protocol_id) AS protocols,
		        COUNT(DISTINCT CASE WHEN p.status = 'verified' THEN p.id END) AS verified
		   FROM tests t LEFT JOIN protocol_tests pt ON pt.test_id = t.id LEFT JOIN protocols p ON p.id = pt.protocol_id
		  WHERE t.code = :code GROUP BY t.id ORDER BY t.version DESC`,
		{ code }
	);
	return rows.map((r) => ({ ...rowToTest(r), protocols: Number(r.protocols), verified: Number(r.verified) }));
}

export async function domainExists(code: string, tx?: Tx): Promise<boolean> {
	return !!(await selectOne('SELECT code FROM domains WHERE code = :code', { code }, tx));
}

export interface DomainRecord {
	code: string;
	name: string;
	position: number;
	tests: number;
}

export async function listDomains(tx?: Tx): Promise<DomainRecord[]> {
	const rows = await select<DomainRecord>(
		`SELECT d.code, d.name, d.position, COUNT(t.id) AS tests FROM domains d
		   LEFT JOIN tests t ON t.domain = d.code AND t.is_current = 1 GROUP BY d.code ORDER BY d.position, d.code`,
		{},
		tx
	);
	return rows.map((r) => ({ ...r, tests: Number(r.tests) }));
}

export async function createDomain(input: { code: string; name: string }, actorId: number | null): Promise<void> {
	if (await domainExists(input.code))
		throw new ServiceError(409, 'That domain already exists.', { code: `The domain ${input.code} already exists` }, 'conflict');
	const pos = await selectOne<{ p: number | null }>('SELECT MAX(position) AS p FROM domains');
	await exec('INSERT INTO domains (code, name, position) VALUES (:code, :name, :pos)', { ...input, pos: Number(pos?.p ?? 0) + 10 });
	await recordEvent({ actorId, entity: 'domain', entityId: input.code, action: 'create', newValue: input });
}

function boundsKey(b: Bounds | null | undefined): string {
	if (!b) return '';
	return (['z', 'standard', 'scaled', 't', 'percentile'] as Derived[])
		.filter((d) => b[d])
		.map((d) => `${d}:${b[d]![0]},${b[d]![1]}`)
		.join(';');
}

/** Which score-altering properties differ (empty: none). */
export function scoreChanges(a: TestInput, b: TestInput): string[] {
	const out: string[] = [];
	if (a.direction !== b.direction) out.push('direction');
	if (a.raw.min !== b.raw.min || a.raw.max !== b.raw.max) out.push('raw range');
	if (a.raw.decimals !== b.raw.decimals) out.push('raw decimals');
	if (canonicalReported(a.reported).join() !== canonicalReported(b.reported).join()) out.push('reported scores');
	if (boundsKey(a.bounds) !== boundsKey(b.bounds)) out.push('bounds');
	if ((a.reliability ?? null) !== (b.reliability ?? null)) out.push('reliability');
	return out;
}

function params(t: TestInput) {
	return {
		code: t.code,
		name: t.name,
		domain: t.domain,
		unit: t.unit,
		direction: t.direction,
		min: t.raw.min,
		max: t.raw.max,
		dec: t.raw.decimals,
		reported: canonicalReported(t.reported).join(','),
		bounds: t.bounds && Object.keys(t.bounds).length ? JSON.stringify(t.bounds) : null,
		reliability: t.reliability ?? null,
		notes: t.notes ?? null
	};
}

async function insertVersion(t: TestInput, version: number, tx: Tx): Promise<number> {
	const r = await exec(
		`INSERT INTO tests (code, version, is_current, name, domain, unit, direction, raw_min, raw_max, raw_decimals, reported, bounds, reliability, notes)
		 VALUES (:code, :version, 1, :name, :domain, :unit, :direction, :min, :max, :dec, :reported, :bounds, :reliability, :notes)`,
		{ ...params(t), version },
		tx
	);
	return r.insertId;
}

function parseInput(input: unknown): TestInput {
	return parseWith(testInputSchema, input);
}

export async function createTest(input: unknown, actorId: number | null, tx?: Tx): Promise<TestRecord> {
	const t = parseInput(input);
	const run = async (tr: Tx) => {
		if (!(await domainExists(t.domain, tr))) throw new ServiceError(400, 'Unknown domain.', { domain: `Unknown domain ${t.domain}` });
		if (await selectOne('SELECT id FROM tests WHERE code = :code LIMIT 1', { code: t.code }, tr))
			throw new ServiceError(409, 'A test with this code already exists.', { code: `The code ${t.code} is taken` }, 'conflict');
		const id = await insertVersion(t, 1, tr);
		await recordEvent({ actorId, entity: 'test', entityId: t.code, action: 'create', newValue: { ...t, version: 1 } }, tr);
		return (await getTestVersion(id, tr))!;
	};
	return tx ? run(tx) : transaction(run);
}

export interface UpdateOutcome {
	test: TestRecord;
	/** `version`: a new version was made because a verified protocol uses the old one. */
	outcome: 'unchanged' | 'updated' | 'version';
	changed: string[];
}

/**
 * Change the current version of test `code`. A change to direction, raw range or decimals,
 * reported scores, bounds or reliability of a version that a verified protocol uses makes a new
 * version; anything else is updated in place.
 */
export async function updateTest(code: string, input: unknown, actorId: number | null, tx?: Tx): Promise<UpdateOutcome> {
	const t = parseInput(input);
	if (t.code !== code) throw new ServiceError(400, 'The code of a test cannot change.', { code: 'A test keeps its code; create a new test instead' });
	const run = async (tr: Tx): Promise<UpdateOutcome> => {
		const row = await selectOne<TestRow>('SELECT * FROM tests WHERE code = :code AND is_current = 1 FOR UPDATE', { code }, tr);
		if (!row) throw notFoundError(`The test ${code}`);
		const old = rowToTest(row);
		if (!(await domainExists(t.domain, tr))) throw new ServiceError(400, 'Unknown domain.', { domain: `Unknown domain ${t.domain}` });
		const changed = scoreChanges(old, t);
		const other = (['name', 'domain', 'unit', 'notes'] as const).filter((k) => (old[k] ?? null) !== (t[k] ?? null));
		if (!changed.length && !other.length) return { test: old, outcome: 'unchanged', changed: [] };
		const used = changed.length
			? await selectOne(
					`SELECT 1 AS x FROM protocol_tests pt JOIN protocols p ON p.id = pt.protocol_id
					  WHERE pt.test_id = :id AND p.status = 'verified' LIMIT 1`,
					{ id: old.id },
					tr
				)
			: null;
		if (used) {
			await exec('UPDATE tests SET is_current = 0 WHERE id = :id', { id: old.id }, tr);
			const id = await insertVersion(t, old.version + 1, tr);
			await recordEvent(
				{
					actorId,
					entity: 'test',
					entityId: code,
					action: 'version',
					oldValue: old,
					newValue: { ...t, version: old.version + 1 },
					reason: `changed ${changed.join(', ')} of a version used by verified protocols`
				},
				tr
			);
			return { test: (await getTestVersion(id, tr))!, outcome: 'version', changed: [...changed, ...other] };
		}
		const p = params(t);
		await exec(
			`UPDATE tests SET name = :name, domain = :domain, unit = :unit, direction = :direction, raw_min = :min, raw_max = :max,
			        raw_decimals = :dec, reported = :reported, bounds = :bounds, reliability = :reliability, notes = :notes
			  WHERE id = :id`,
			{ ...p, id: old.id },
			tr
		);
		await recordEvent({ actorId, entity: 'test', entityId: code, action: 'update', oldValue: old, newValue: t }, tr);
		return { test: (await getTestVersion(old.id, tr))!, outcome: 'updated', changed: [...changed, ...other] };
	};
	return tx ? run(tx) : transaction(run);
}

/**
 * Tests of the catalog, versioned: a change that alters scores of a test a verified protocol was
 * scored with makes a new version (the old one stays, no longer current); any other change is made
 * in place. Name, unit, domain and notes never make a version.
 */
import { isUniqueViolation, select, transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { canonicalReported, testInputSchema, type Bounds, type Derived, type TestInput } from '../../catalog/schema';
import { models } from '../models';
import type { Test } from '../models/catalog';
import type { TestDef } from '../../scoring/reconcile';
import { groupCoverage } from '../../scoring/age';
import { groupDef, normSetsOfTest } from './norms';
import { ServiceError, notFoundError, parseWith } from '../errors';

export interface TestRecord extends TestInput {
	id: number;
	version: number;
	is_current: boolean;
	created_at: string;
}

/** A test as the workflow takes it: the record and its domain's name. */
export interface CatalogTest extends TestRecord {
	domainName: string;
}

/** The one mapper of a `tests` row, for the catalog screens and the protocol workflow alike. */
export function toTest(r: Test): TestRecord {
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
		reported: canonicalReported(r.reported.split(',').map((f) => f.trim())),
		bounds: (r.bounds as Bounds | null) ?? null,
		reliability: r.reliability === null ? null : Number(r.reliability),
		notes: r.notes,
		created_at: new Date(r.created_at).toISOString()
	};
}

export const toCatalogTest = (r: Test): CatalogTest => ({ ...toTest(r), domainName: r.domainInfo?.name ?? r.domain });

/** What the engine takes of a test (shared/spec/reconcile.md). */
export const engineTest = (t: CatalogTest): TestDef => ({ id: t.code, direction: t.direction, raw: t.raw, reported: t.reported, bounds: t.bounds });

const tx_ = (tx?: Tx) => tx ?? undefined;
/** Tests in domain order (the domain's position, then its code), then by code. */
const withDomain = () => ({ association: 'domainInfo', required: true });
const DOMAIN_ORDER = [['domainInfo', 'position', 'ASC'] as const, ['domain', 'ASC'] as const, ['code', 'ASC'] as const];

/** Current versions of all tests, in domain order. */
export async function listTests(opts: { domain?: string } = {}, tx?: Tx): Promise<TestRecord[]> {
	const { Test } = models();
	const rows = await Test.findAll({
		where: { is_current: true, ...(opts.domain ? { domain: opts.domain } : {}) },
		include: [withDomain()],
		order: DOMAIN_ORDER as never,
		transaction: tx_(tx)
	});
	return rows.map(toTest);
}

export async function getTest(code: string, tx?: Tx): Promise<TestRecord | null> {
	const r = await models().Test.findOne({ where: { code, is_current: true }, transaction: tx_(tx) });
	return r ? toTest(r) : null;
}

export async function getTestVersion(id: number, tx?: Tx): Promise<TestRecord | null> {
	const r = await models().Test.findByPk(id, { transaction: tx_(tx) });
	return r ? toTest(r) : null;
}

/** Every version of a test, newest first, with how many protocols use each. */
export async function testVersions(code: string): Promise<(TestRecord & { protocols: number; verified: number })[]> {
	const versions = await models().Test.findAll({ where: { code }, order: [['version', 'DESC']] });
	if (!versions.length) return [];
	// an aggregate over the protocol side's tables: counted by the database
	const counts = await select<{ test_id: number; protocols: number; verified: number }>(
		`SELECT pt.test_id, COUNT(DISTINCT pt.protocol_id) AS protocols, COUNT(DISTINCT CASE WHEN p.status = 'verified' THEN p.id END) AS verified
		   FROM protocol_tests pt JOIN protocols p ON p.id = pt.protocol_id WHERE pt.test_id IN (:ids) GROUP BY pt.test_id`,
		{ ids: versions.map((v) => v.id) }
	);
	const byId = new Map(counts.map((c) => [Number(c.test_id), c]));
	return versions.map((v) => ({ ...toTest(v), protocols: Number(byId.get(v.id)?.protocols ?? 0), verified: Number(byId.get(v.id)?.verified ?? 0) }));
}

/** The battery's tests at their current versions, in administration order (battery → battery_tests → tests). */
export async function batteryTests(batteryId: number, tx?: Tx): Promise<CatalogTest[]> {
	const { BatteryTest } = models();
	const items = await BatteryTest.findAll({
		where: { battery_id: batteryId },
		include: [{ association: 'test', required: true, where: { is_current: true }, include: [withDomain()] }],
		order: [['position', 'ASC']],
		transaction: tx_(tx)
	});
	return items.map((i) => toCatalogTest(i.test!));
}

export interface ProtocolTest extends CatalogTest {
	position: number;
	groupId: number | null;
	groupCode: string | null;
	/** What the group covers, for people ("ages 30;0–39;11, 13+ years of education"). */
	groupText: string;
	overrideReason: string | null;
	normForm: string;
	normScale: string | null;
}

/** The tests a protocol was created with (frozen versions), in order, with the norm group chosen: one statement
 * (protocol_tests → test version → its domain, and → norm group). */
export async function protocolTests(protocolId: number, tx?: Tx): Promise<ProtocolTest[]> {
	const rows = await models().ProtocolTest.findAll({
		where: { protocol_id: protocolId },
		include: [
			{ association: 'test', required: true, include: [withDomain()] },
			{ association: 'normGroup', required: false }
		],
		order: [['position', 'ASC']],
		transaction: tx_(tx)
	});
	return rows.map((f) => {
		const g = f.normGroup ?? undefined;
		return {
			...toCatalogTest(f.test!),
			position: f.position,
			groupId: f.norm_group_id,
			groupCode: g?.group_code ?? null,
			groupText: g ? groupCoverage(groupDef(g)) : '—',
			overrideReason: f.override_reason,
			normForm: g?.form ?? 'mean_sd',
			normScale: g?.scale ?? null
		};
	});
}

/** The test's page: its current version, every version with its use, the domains, the norm sets that norm it. */
export async function testDetail(code: string) {
	const test = await getTest(code);
	if (!test) return null;
	const [versions, domains, norms] = await Promise.all([testVersions(test.code), listDomains(), normSetsOfTest(test.code)]);
	return { test, versions, domains, norms };
}

export async function domainExists(code: string, tx?: Tx): Promise<boolean> {
	return !!(await models().Domain.findByPk(code, { attributes: ['code'], transaction: tx_(tx) }));
}

export interface DomainRecord {
	code: string;
	name: string;
	position: number;
	tests: number;
}

export async function listDomains(tx?: Tx): Promise<DomainRecord[]> {
	const { Domain, Test } = models();
	const [domains, counts] = await Promise.all([
		Domain.findAll({
			order: [
				['position', 'ASC'],
				['code', 'ASC']
			],
			transaction: tx_(tx)
		}),
		// current tests per domain (COUNT … GROUP BY)
		Test.count({ where: { is_current: true }, group: ['domain'], transaction: tx_(tx) })
	]);
	const n = new Map(counts.map((c) => [String(c.domain), Number(c.count)]));
	return domains.map((d) => ({ code: d.code, name: d.name, position: d.position, tests: n.get(d.code) ?? 0 }));
}

export async function createDomain(input: { code: string; name: string }, actorId: number | null): Promise<void> {
	const exists = () => new ServiceError(409, 'That domain already exists.', { code: `The domain ${input.code} already exists` }, 'conflict');
	// the row and its trail event together; the unique key settles two creations at once
	await transaction(async (t) => {
		if (await domainExists(input.code, t)) throw exists();
		const { Domain } = models();
		const last = Number((await Domain.max('position', { transaction: t })) ?? 0);
		await Domain.create({ code: input.code, name: input.name, position: last + 10 }, { transaction: t });
		await recordEvent({ actorId, entity: 'domain', entityId: input.code, action: 'create', newValue: input }, t);
	}).catch((e) => {
		throw isUniqueViolation(e) ? exists() : e;
	});
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

/** The columns of a test as stored. */
function columns(t: TestInput) {
	return {
		code: t.code,
		name: t.name,
		domain: t.domain,
		unit: t.unit,
		direction: t.direction,
		raw_min: t.raw.min,
		raw_max: t.raw.max,
		raw_decimals: t.raw.decimals,
		reported: canonicalReported(t.reported).join(','),
		bounds: t.bounds && Object.keys(t.bounds).length ? t.bounds : null,
		reliability: t.reliability ?? null,
		notes: t.notes ?? null
	};
}

async function insertVersion(t: TestInput, version: number, tx: Tx): Promise<number> {
	return (await models().Test.create({ ...columns(t), version, is_current: true }, { transaction: tx_(tx) })).id;
}

function parseInput(input: unknown): TestInput {
	return parseWith(testInputSchema, input);
}

export async function createTest(input: unknown, actorId: number | null, tx?: Tx): Promise<TestRecord> {
	const t = parseInput(input);
	const run = async (tr: Tx) => {
		if (!(await domainExists(t.domain, tr))) throw new ServiceError(400, 'Unknown domain.', { domain: `Unknown domain ${t.domain}` });
		if (await models().Test.findOne({ attributes: ['id'], where: { code: t.code }, transaction: tx_(tr) }))
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
		const { Test } = models();
		const row = await Test.findOne({ where: { code, is_current: true }, lock: true, transaction: tx_(tr) });
		if (!row) throw notFoundError(`The test ${code}`);
		const old = toTest(row);
		if (!(await domainExists(t.domain, tr))) throw new ServiceError(400, 'Unknown domain.', { domain: `Unknown domain ${t.domain}` });
		const changed = scoreChanges(old, t);
		const other = (['name', 'domain', 'unit', 'notes'] as const).filter((k) => (old[k] ?? null) !== (t[k] ?? null));
		if (!changed.length && !other.length) return { test: old, outcome: 'unchanged', changed: [] };
		// an existence check on the protocol side's tables
		const used = changed.length
			? (
					await select(
						`SELECT 1 AS x FROM protocol_tests pt JOIN protocols p ON p.id = pt.protocol_id
						  WHERE pt.test_id = :id AND p.status = 'verified' LIMIT 1`,
						{ id: old.id },
						tr
					)
				).length > 0
			: false;
		if (used) {
			await row.update({ is_current: false }, { transaction: tx_(tr) });
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
		await row.update(columns(t), { transaction: tx_(tr) });
		await recordEvent({ actorId, entity: 'test', entityId: code, action: 'update', oldValue: old, newValue: t }, tr);
		return { test: (await getTestVersion(old.id, tr))!, outcome: 'updated', changed: [...changed, ...other] };
	};
	return tx ? run(tx) : transaction(run);
}

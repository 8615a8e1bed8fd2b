/** Batteries: ordered lists of tests grouped by domain, as a protocol is administered. */
import { Op } from 'sequelize';
import { transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { batterySchema, type BatteryInput, type CompositeInput, type CompositeField } from '../../catalog/schema';
import { models, type Composite, type FrozenComposite } from '../models';
import type { Battery } from '../models/catalog';
import type { CompositeDef, CompositeField as EngineCompositeField } from '../../scoring/norms';
import { groupCoverage } from '../../scoring/age';
import { ServiceError, notFoundError, parseWith } from '../errors';
import { toCatalogTest, type TestRecord } from './tests';
import { groupDef } from './norms';
import { usersWithRole } from '../users';

export interface BatterySummary {
	id: number;
	code: string;
	name: string;
	description: string | null;
	norm_set_id: number | null;
	norm_set_name: string | null;
	tests: number;
	created_at: string;
}

export interface BatteryRecord extends BatterySummary {
	/** Tests in administration order (current versions). */
	items: (TestRecord & { position: number })[];
	/** The same tests grouped by domain, domains in the order they first appear. */
	domains: { code: string; name: string; tests: (TestRecord & { position: number })[] }[];
	/** Composite (index) scores over the battery's tests, in report order. */
	composites: CompositeRecord[];
}

export interface CompositeRecord extends CompositeInput {
	id: number;
	position: number;
}

const tx_ = (tx?: Tx) => tx ?? undefined;

/** The one mapper of a `composites` row. */
function toComposite(c: Composite): CompositeRecord {
	return {
		id: c.id,
		position: c.position,
		code: c.code,
		name: c.name,
		parts: c.parts,
		part_field: c.part_field,
		reported: c.reported.split(',').filter(Boolean) as CompositeField[],
		reliability: c.reliability
	};
}

/** Every battery's composites by code and name (the norm editor's list). */
export async function listAllComposites(tx?: Tx): Promise<{ code: string; name: string }[]> {
	const { Composite } = models();
	return (await Composite.findAll({ attributes: ['code', 'name'], order: [['code', 'ASC']], transaction: tx_(tx) })).map((c) => ({
		code: c.code,
		name: c.name
	}));
}

export async function listComposites(batteryId: number, tx?: Tx): Promise<CompositeRecord[]> {
	const { Composite } = models();
	const rows = await Composite.findAll({ where: { battery_id: batteryId }, order: [['position', 'ASC']], transaction: tx_(tx) });
	return rows.map(toComposite);
}

/** The battery's composites as defined now (what a new protocol freezes). */
export async function batteryComposites(batteryId: number, tx?: Tx): Promise<FrozenComposite[]> {
	return (await listComposites(batteryId, tx)).map(({ id: _id, position: _position, ...definition }) => definition);
}

export interface CatalogComposite extends FrozenComposite {
	position: number;
	groupId: number | null;
	groupCode: string | null;
	groupText: string;
}

/** The composites a protocol froze at creation, in report order, with their norm group. */
export async function protocolComposites(protocolId: number, tx?: Tx): Promise<CatalogComposite[]> {
	// one statement: the frozen composites and their norm groups
	const rows = await models().ProtocolComposite.findAll({
		where: { protocol_id: protocolId },
		include: [{ association: 'normGroup', required: false }],
		order: [['position', 'ASC']],
		transaction: tx_(tx)
	});
	return rows.map((r) => {
		const g = r.normGroup ?? undefined;
		return {
			...r.definition,
			position: r.position,
			groupId: r.norm_group_id,
			groupCode: g?.group_code ?? null,
			// what the group covers, in words, as for tests ("ages 30;0–39;11")
			groupText: g ? groupCoverage(groupDef(g)) : '—'
		};
	});
}

export const engineComposite = (c: FrozenComposite): CompositeDef => ({
	id: c.code,
	parts: c.parts,
	part_field: c.part_field,
	reported: c.reported as EngineCompositeField[]
});

/** The one mapper of a `batteries` row (with its norm set's name and its number of tests). */
function toSummary(b: Battery, tests: number): BatterySummary {
	return {
		id: b.id,
		code: b.code,
		name: b.name,
		description: b.description ?? null,
		norm_set_id: b.norm_set_id,
		norm_set_name: b.normSet?.name ?? null,
		tests,
		created_at: new Date(b.created_at).toISOString()
	};
}

const normSetName = () => ({ association: 'normSet', attributes: ['id', 'name'] });

export async function listBatteries(tx?: Tx): Promise<BatterySummary[]> {
	const { Battery, BatteryTest } = models();
	const [batteries, counts] = await Promise.all([
		Battery.findAll({ include: [normSetName()], order: [['name', 'ASC']], transaction: tx_(tx) }),
		// tests per battery (COUNT … GROUP BY)
		BatteryTest.count({ group: ['battery_id'], transaction: tx_(tx) })
	]);
	const n = new Map(counts.map((c) => [Number(c.battery_id), Number(c.count)]));
	return batteries.map((b) => toSummary(b, n.get(b.id) ?? 0));
}

/** A battery with its tests (battery → battery_tests → current tests, with their domains) and composites. */
export async function getBattery(id: number, tx?: Tx): Promise<BatteryRecord | null> {
	const { Battery } = models();
	const b = await Battery.findByPk(id, {
		include: [
			normSetName(),
			{
				association: 'items',
				separate: true,
				order: [['position', 'ASC']],
				include: [{ association: 'test', required: false, where: { is_current: true }, include: [{ association: 'domainInfo' }] }]
			},
			{ association: 'composites', separate: true, order: [['position', 'ASC']] }
		],
		transaction: tx_(tx)
	});
	if (!b) return null;
	const all = b.items ?? [];
	const items = all.flatMap((o) => (o.test ? [{ ...toCatalogTest(o.test), position: Number(o.position) }] : []));
	const domains: BatteryRecord['domains'] = [];
	for (const it of items) {
		let d = domains.find((x) => x.code === it.domain);
		if (!d) domains.push((d = { code: it.domain, name: it.domainName, tests: [] }));
		const { domainName: _name, ...test } = it;
		d.tests.push(test);
	}
	return {
		...toSummary(b, all.length),
		items: items.map(({ domainName: _name, ...test }) => test),
		domains,
		composites: (b.composites ?? []).map(toComposite)
	};
}

export async function getBatteryByCode(code: string, tx?: Tx): Promise<BatteryRecord | null> {
	const r = await models().Battery.findOne({ attributes: ['id'], where: { code }, transaction: tx_(tx) });
	return r ? getBattery(r.id, tx) : null;
}

/** What the new-protocol form offers: batteries (default norm set, number of tests), norm sets, scorers and reviewers. */
export async function protocolFormChoices() {
	const { NormSet } = models();
	const [batteries, normSets, scorers, reviewers] = await Promise.all([
		listBatteries(),
		NormSet.findAll({
			attributes: ['id', 'name', 'version'],
			order: [
				['name', 'ASC'],
				['version', 'ASC']
			]
		}),
		usersWithRole('scorer'),
		usersWithRole('reviewer')
	]);
	return {
		batteries: batteries.map((b) => ({ id: b.id, name: b.name, norm_set_id: b.norm_set_id, tests: b.tests })),
		normSets: normSets.map((s) => ({ id: s.id, name: s.name, version: s.version })),
		scorers: scorers.map((u) => ({ id: u.id, name: u.name })),
		reviewers: reviewers.map((u) => ({ id: u.id, name: u.name }))
	};
}

function parse(input: unknown): BatteryInput {
	return parseWith(batterySchema, input, 'field');
}

async function checkRefs(b: BatteryInput, tr: Tx) {
	const { NormSet, Test } = models();
	if (b.norm_set_id !== null && !(await NormSet.findByPk(b.norm_set_id, { attributes: ['id'], transaction: tx_(tr) })))
		throw new ServiceError(400, 'Unknown norm set.', { norm_set_id: 'Choose a norm set from the list' });
	const known = new Set(
		(await Test.findAll({ attributes: ['code'], where: { is_current: true, code: { [Op.in]: b.tests } }, transaction: tx_(tr) })).map((r) => r.code)
	);
	const unknown = b.tests.filter((c) => !known.has(c));
	if (unknown.length) throw new ServiceError(400, 'Unknown tests.', { tests: `Unknown test code${unknown.length > 1 ? 's' : ''}: ${unknown.join(', ')}` });
}

/**
 * Composites: codes unique across tests and composites, parts among the battery's tests and
 * reporting the part field. Refused with the composite named.
 */
async function checkComposites(batteryId: number | null, b: BatteryInput, tr: Tx) {
	if (!b.composites) return;
	const codes = new Set<string>();
	const { Composite, Test } = models();
	const tests = await Test.findAll({ attributes: ['code', 'reported'], where: { is_current: true }, transaction: tx_(tr) });
	const testCodes = new Map(tests.map((t) => [t.code, t.reported.split(',')]));
	const taken = await Composite.findAll({ where: { code: b.composites.map((c) => c.code) }, transaction: tx_(tr) });
	for (const [i, c] of b.composites.entries()) {
		const key = `composites.${i}`;
		if (codes.has(c.code)) throw new ServiceError(400, `Composite ${c.code} is defined twice.`, { [key]: `The code ${c.code} appears twice` });
		codes.add(c.code);
		if (testCodes.has(c.code))
			throw new ServiceError(400, `Composite ${c.code}: a test has this code; composites and tests need different codes.`, {
				[key]: `The code ${c.code} is a test's`
			});
		const other = taken.find((t) => t.code === c.code && t.battery_id !== batteryId);
		if (other)
			throw new ServiceError(409, `Composite ${c.code}: another battery has a composite with this code.`, { [key]: `The code ${c.code} is taken` }, 'conflict');
		for (const part of c.parts) {
			if (!b.tests.includes(part))
				throw new ServiceError(400, `Composite ${c.code}: part ${part} is not a test of this battery.`, { [key]: `Part ${part} is not in the battery` });
			if (!testCodes.get(part)?.includes(c.part_field))
				throw new ServiceError(400, `Composite ${c.code}: part ${part} does not report the ${c.part_field} score the composite sums.`, {
					[key]: `Part ${part} does not report ${c.part_field}`
				});
		}
	}
}

async function writeComposites(batteryId: number, b: BatteryInput, tr: Tx) {
	if (!b.composites) return;
	const { Composite } = models();
	await Composite.destroy({ where: { battery_id: batteryId }, transaction: tx_(tr) });
	await Composite.bulkCreate(
		b.composites.map((c, i) => ({
			battery_id: batteryId,
			code: c.code,
			name: c.name,
			position: i + 1,
			part_field: c.part_field,
			parts: c.parts,
			reported: c.reported.join(','),
			reliability: c.reliability
		})),
		{ transaction: tx_(tr) }
	);
}

async function writeTests(id: number, tests: string[], tr: Tx) {
	const { BatteryTest } = models();
	await BatteryTest.destroy({ where: { battery_id: id }, transaction: tx_(tr) });
	await BatteryTest.bulkCreate(
		tests.map((code, i) => ({ battery_id: id, test_code: code, position: i + 1 })),
		{ transaction: tx_(tr) }
	);
}

/** Tests are stored in the order given, grouped by domain (a domain's tests stay together, in the order its first test appears). */
export function groupByDomain(tests: string[], domainOf: (code: string) => string): string[] {
	const order: string[] = [];
	for (const c of tests) if (!order.includes(domainOf(c))) order.push(domainOf(c));
	return order.flatMap((d) => tests.filter((c) => domainOf(c) === d));
}

export async function createBattery(input: unknown, actorId: number | null): Promise<BatteryRecord> {
	const b = parse(input);
	return transaction(async (tr) => {
		const { Battery } = models();
		if (await Battery.findOne({ attributes: ['id'], where: { code: b.code }, transaction: tr }))
			throw new ServiceError(409, 'A battery with this code already exists.', { code: `The code ${b.code} is taken` }, 'conflict');
		await checkRefs(b, tr);
		await checkComposites(null, b, tr);
		const domainOf = await domainLookup(tr);
		const { id } = await Battery.create({ code: b.code, name: b.name, description: b.description || null, norm_set_id: b.norm_set_id }, { transaction: tr });
		await writeTests(id, groupByDomain(b.tests, domainOf), tr);
		await writeComposites(id, b, tr);
		await recordEvent({ actorId, entity: 'battery', entityId: id, action: 'create', newValue: b }, tr);
		return (await getBattery(id, tr))!;
	});
}

async function domainLookup(tr: Tx): Promise<(c: string) => string> {
	const tests = await models().Test.findAll({ attributes: ['code', 'domain'], where: { is_current: true }, transaction: tx_(tr) });
	const m = new Map(tests.map((r) => [r.code, r.domain]));
	return (c) => m.get(c) ?? '';
}

/** Protocols keep the test versions they were created with, so a battery may change at any time. */
export async function updateBattery(id: number, input: unknown, actorId: number | null): Promise<BatteryRecord> {
	const b = parse(input);
	return transaction(async (tr) => {
		const old = await getBattery(id, tr);
		if (!old) throw notFoundError('This battery');
		const { Battery } = models();
		if (await Battery.findOne({ attributes: ['id'], where: { code: b.code, id: { [Op.ne]: id } }, transaction: tr }))
			throw new ServiceError(409, 'A battery with this code already exists.', { code: `The code ${b.code} is taken` }, 'conflict');
		await checkRefs(b, tr);
		await checkComposites(id, { ...b, composites: b.composites ?? old.composites }, tr);
		const domainOf = await domainLookup(tr);
		await Battery.update({ code: b.code, name: b.name, description: b.description || null, norm_set_id: b.norm_set_id }, { where: { id }, transaction: tr });
		await writeTests(id, groupByDomain(b.tests, domainOf), tr);
		await writeComposites(id, b, tr);
		await recordEvent(
			{
				actorId,
				entity: 'battery',
				entityId: id,
				action: 'update',
				oldValue: { ...old, items: old.items.map((i) => i.code), domains: undefined },
				newValue: b
			},
			tr
		);
		return (await getBattery(id, tr))!;
	});
}

/** Batteries: ordered lists of tests grouped by domain, as a protocol is administered. */
import { exec, select, selectOne, transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import { batterySchema, type BatteryInput, type CompositeInput, type CompositeField } from '../../catalog/schema';
import { models } from '../models';
import { ServiceError, notFoundError, parseWith } from '../errors';
import { listTests, type TestRecord } from './tests';

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

/** Every battery's composites by code and name (the norm editor's list). */
export async function listAllComposites(tx?: Tx): Promise<{ code: string; name: string }[]> {
	const { Composite } = models();
	return (await Composite.findAll({ attributes: ['code', 'name'], order: [['code', 'ASC']], transaction: tx ?? undefined })).map((c) => ({
		code: c.code,
		name: c.name
	}));
}

export async function listComposites(batteryId: number, tx?: Tx): Promise<CompositeRecord[]> {
	const { Composite } = models();
	const rows = await Composite.findAll({ where: { battery_id: batteryId }, order: [['position', 'ASC']], transaction: tx ?? undefined });
	return rows.map((c) => ({
		id: c.id,
		position: c.position,
		code: c.code,
		name: c.name,
		parts: c.parts,
		part_field: c.part_field,
		reported: c.reported.split(',').filter(Boolean) as CompositeField[],
		reliability: c.reliability
	}));
}

const SUMMARY = `SELECT b.*, s.name AS norm_set_name, COUNT(bt.test_code) AS tests FROM batteries b
	LEFT JOIN norm_sets s ON s.id = b.norm_set_id LEFT JOIN battery_tests bt ON bt.battery_id = b.id`;

function rowToSummary(r: Record<string, unknown>): BatterySummary {
	return {
		id: Number(r.id),
		code: String(r.code),
		name: String(r.name),
		description: (r.description as string | null) ?? null,
		norm_set_id: r.norm_set_id === null ? null : Number(r.norm_set_id),
		norm_set_name: (r.norm_set_name as string | null) ?? null,
		tests: Number(r.tests ?? 0),
		created_at: new Date(r.created_at as Date).toISOString()
	};
}

export async function listBatteries(tx?: Tx): Promise<BatterySummary[]> {
	return (await select<Record<string, unknown>>(`${SUMMARY} GROUP BY b.id ORDER BY b.name`, {}, tx)).map(rowToSummary);
}

export async function getBattery(id: number, tx?: Tx): Promise<BatteryRecord | null> {
	const r = await selectOne<Record<string, unknown>>(`${SUMMARY} WHERE b.id = :id GROUP BY b.id`, { id }, tx);
	if (!r) return null;
	const order = await select<{ test_code: string; position: number }>(
		'SELECT test_code, position FROM battery_tests WHERE battery_id = :id ORDER BY position',
		{ id },
		tx
	);
	const tests = new Map((await listTests({}, tx)).map((t) => [t.code, t]));
	const domainNames = new Map((await select<{ code: string; name: string }>('SELECT code, name FROM domains', {}, tx)).map((d) => [d.code, d.name]));
	const items = order.flatMap((o) => {
		const t = tests.get(o.test_code);
		return t ? [{ ...t, position: Number(o.position) }] : [];
	});
	const domains: BatteryRecord['domains'] = [];
	for (const it of items) {
		let d = domains.find((x) => x.code === it.domain);
		if (!d) domains.push((d = { code: it.domain, name: domainNames.get(it.domain) ?? it.domain, tests: [] }));
		d.tests.push(it);
	}
	return { ...rowToSummary(r), items, domains, composites: await listComposites(id, tx) };
}

export async function getBatteryByCode(code: string, tx?: Tx): Promise<BatteryRecord | null> {
	const r = await selectOne<{ id: number }>('SELECT id FROM batteries WHERE code = :code', { code }, tx);
	return r ? getBattery(r.id, tx) : null;
}

function parse(input: unknown): BatteryInput {
	return parseWith(batterySchema, input, 'field');
}

async function checkRefs(b: BatteryInput, tr: Tx) {
	if (b.norm_set_id !== null && !(await selectOne('SELECT id FROM norm_sets WHERE id = :id', { id: b.norm_set_id }, tr)))
		throw new ServiceError(400, 'Unknown norm set.', { norm_set_id: 'Choose a norm set from the list' });
	const known = new Set(
		(await select<{ code: string }>('SELECT code FROM tests WHERE is_current = 1 AND code IN (:codes)', { codes: b.tests }, tr)).map((r) => r.code)
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
	const tests = await select<{ code: string; reported: string }>('SELECT code, reported FROM tests WHERE is_current = 1', {}, tr);
	const testCodes = new Map(tests.map((t) => [t.code, t.reported.split(',')]));
	const { Composite } = models();
	const taken = await Composite.findAll({ where: { code: b.composites.map((c) => c.code) }, transaction: tr ?? undefined });
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
	await Composite.destroy({ where: { battery_id: batteryId }, transaction: tr ?? undefined });
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
		{ transaction: tr ?? undefined }
	);
}

async function writeTests(id: number, tests: string[], tr: Tx) {
	await exec('DELETE FROM battery_tests WHERE battery_id = :id', { id }, tr);
	for (const [i, code] of tests.entries())
		await exec('INSERT INTO battery_tests (battery_id, test_code, position) VALUES (:id, :code, :pos)', { id, code, pos: i + 1 }, tr);
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
		if (await selectOne('SELECT id FROM batteries WHERE code = :code', { code: b.code }, tr))
			throw new ServiceError(409, 'A battery with this code already exists.', { code: `The code ${b.code} is taken` }, 'conflict');
		await checkRefs(b, tr);
		await checkComposites(null, b, tr);
		const domainOf = await domainLookup(tr);
		const r = await exec(
			'INSERT INTO batteries (code, name, description, norm_set_id) VALUES (:code, :name, :description, :norm_set_id)',
			{ ...b, description: b.description || null },
			tr
		);
		await writeTests(r.insertId, groupByDomain(b.tests, domainOf), tr);
		await writeComposites(r.insertId, b, tr);
		await recordEvent({ actorId, entity: 'battery', entityId: r.insertId, action: 'create', newValue: b }, tr);
		return (await getBattery(r.insertId, tr))!;
	});
}

async function domainLookup(tr: Tx): Promise<(c: string) => string> {
	const m = new Map(
		(await select<{ code: string; domain: string }>('SELECT code, domain FROM tests WHERE is_current = 1', {}, tr)).map((r) => [r.code, r.domain])
	);
	return (c) => m.get(c) ?? '';
}

/** Protocols keep the test versions they were created with, so a battery may change at any time. */
export async function updateBattery(id: number, input: unknown, actorId: number | null): Promise<BatteryRecord> {
	const b = parse(input);
	return transaction(async (tr) => {
		const old = await getBattery(id, tr);
		if (!old) throw notFoundError('This battery');
		if (await selectOne('SELECT id FROM batteries WHERE code = :code AND id <> :id', { code: b.code, id }, tr))
			throw new ServiceError(409, 'A battery with this code already exists.', { code: `The code ${b.code} is taken` }, 'conflict');
		await checkRefs(b, tr);
		await checkComposites(id, { ...b, composites: b.composites ?? old.composites }, tr);
		const domainOf = await domainLookup(tr);
		await exec(
			'UPDATE batteries SET code = :code, name = :name, description = :description, norm_set_id = :norm_set_id WHERE id = :id',
			{ ...b, description: b.description || null, id },
			tr
		);
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

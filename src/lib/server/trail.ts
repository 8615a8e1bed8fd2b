/** The append-only trail of every change (table audit_events; the app's database user may only SELECT and INSERT there). */
import type { Transaction } from 'sequelize';
import { autocommit, type Tx } from './db';
import { trailRows } from './models/trail';

export interface TrailEvent {
	actorId: number | null;
	entity: string;
	entityId: number | string;
	action: string;
	protocolId?: number | null;
	oldValue?: unknown;
	newValue?: unknown;
	reason?: string | null;
}

/** An event as its audit_events row (the columns of TRAIL_COLUMNS; `at` is the database's clock). */
export const trailRow = (e: TrailEvent) => ({
	actor_id: e.actorId,
	entity: e.entity,
	entity_id: String(e.entityId),
	action: e.action,
	protocol_id: e.protocolId ?? null,
	old_value: e.oldValue === undefined ? null : JSON.stringify(e.oldValue),
	new_value: e.newValue === undefined ? null : JSON.stringify(e.newValue),
	reason: e.reason ?? null
});

/** The columns `trailRow` fills, for a hot path that writes the row with raw SQL (protocols/decisions.ts). */
export const TRAIL_COLUMNS = ['actor_id', 'entity', 'entity_id', 'action', 'protocol_id', 'old_value', 'new_value', 'reason'] as const;

/** Add an event to the trail, in the caller's transaction (a change and its event commit together). */
export async function recordEvent(e: TrailEvent, t?: Tx): Promise<void> {
	const row = trailRow(e);
	const create = (transaction?: Transaction) => trailRows().create(row, { transaction });
	if (t) {
		await create(t);
		return;
	}
	// on its own it commits as it runs (../db.ts autocommit: retried on a conflict, which means it was not applied)
	await autocommit(() => create());
}

/** Add several events of one transaction in one multi-row INSERT, in the order given (ids ascend with it). */
export async function recordEvents(events: TrailEvent[], t: Transaction): Promise<void> {
	if (events.length) await trailRows().bulkCreate(events.map(trailRow), { transaction: t, validate: true });
}

/** How many events the trail holds for one entity (e.g. the standing changes of a scorer on a battery). */
export async function countEvents(entity: string, entityId: string, t?: Tx): Promise<number> {
	return trailRows().count({ where: { entity, entity_id: entityId }, transaction: t ?? undefined });
}

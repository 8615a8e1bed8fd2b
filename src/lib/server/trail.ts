/** The append-only trail of every change (table audit_events; the app's database user may only SELECT and INSERT there). */
import { exec, type Tx } from './db';

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

export async function recordEvent(e: TrailEvent, t?: Tx): Promise<void> {
	await exec(
		`INSERT INTO audit_events (actor_id, entity, entity_id, action, protocol_id, old_value, new_value, reason)
		 VALUES (:actor, :entity, :entityId, :action, :protocolId, :oldValue, :newValue, :reason)`,
		{
			actor: e.actorId,
			entity: e.entity,
			entityId: String(e.entityId),
			action: e.action,
			protocolId: e.protocolId ?? null,
			oldValue: e.oldValue === undefined ? null : JSON.stringify(e.oldValue),
			newValue: e.newValue === undefined ? null : JSON.stringify(e.newValue),
			reason: e.reason ?? null
		},
		t
	);
}

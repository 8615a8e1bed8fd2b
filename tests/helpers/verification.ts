/** Fixtures for the risk-based verification tests: a battery and scorers of their own, a clean record seeded in bulk. */
import { exec, select, selectOne } from '../../src/lib/server/db';
import { applyToDaily } from '../../src/lib/server/audit-stats/record';
import { ACCOUNTS } from './http';

let n = 0;
const tag = () => `${Date.now().toString(36)}${++n}`.toUpperCase();

/** A copy of the demo battery brief-screen (5 tests), so a policy set here touches no other test. */
export async function makeBattery(): Promise<{ id: number; code: string }> {
	const code = `vt-${tag()}`.toLowerCase();
	const { insertId } = await exec(
		`INSERT INTO batteries (code, name, description, norm_set_id) SELECT :code, :name, description, norm_set_id FROM batteries WHERE code = 'brief-screen'`,
		{
			code,
			name: `Verification test battery ${code}`
		}
	);
	await exec(
		`INSERT INTO battery_tests (battery_id, test_code, position) SELECT :id, bt.test_code, bt.position FROM battery_tests bt JOIN batteries b ON b.id = bt.battery_id WHERE b.code = 'brief-screen'`,
		{ id: insertId }
	);
	return { id: insertId, code };
}

/** An invented scorer account with the demo password. */
export async function makeScorer(label: string): Promise<{ id: number; email: string; name: string }> {
	const t = tag();
	const email = `${label.toLowerCase()}.${t.toLowerCase()}@demo.crosstally.test`;
	const name = `${label} ${t}`;
	const { insertId } = await exec(
		`INSERT INTO users (email, name, password_hash, roles) SELECT :email, :name, password_hash, 'scorer' FROM users WHERE email = :sam`,
		{ email, name, sam: ACCOUNTS.scorer }
	);
	return { id: insertId, email, name };
}

const FAKE_PROTOCOL_BASE = 3_000_000_000;

/**
 * A scorer's double-entered record, inserted in bulk (not through the UI): `protocols` rounds of
 * 5 raw + 25 derived fields each, entered `daysAgo` days ago, with no raw-score error. Written the way
 * recordSubmission writes audit_fields (a '' row per pass and one per test), daily sums included.
 */
export async function seedCleanRecord(scorerId: number, batteryId: number, protocols: number, daysAgo = 1): Promise<number> {
	const fake = FAKE_PROTOCOL_BASE + scorerId * 10 + (++n % 10);
	const at = new Date(Date.now() - daysAgo * 86_400_000);
	const rows: unknown[] = [];
	const params: Record<string, unknown> = { at, s: scorerId, b: batteryId, p: fake };
	for (let i = 0; i < protocols; i++) {
		params[`pass${i}`] = 2_000_000_000 + scorerId * 100_000 + (n % 10) * 10_000 + i;
		rows.push(`(:pass${i}, '', :p, 1, 'first', :s, :b, '', 30, 0, 0, :at)`, `(:pass${i}, 'seeded', :p, 1, 'first', :s, :b, 'seeded', 30, 5, 25, :at)`);
	}
	await exec(
		`INSERT INTO audit_fields (pass_id, test_code, protocol_id, round, which, scorer_id, battery_id, domain, fields_entered, raw_fields, derived_fields, entered_at) VALUES ${rows.join(',')}`,
		params
	);
	await applyToDaily({ protocolId: fake, round: 1 }, 1);
	return fake;
}

/** Take a seeded record out again (daily sums included), so other test files see the audit as before. */
export async function unseed(fakeProtocolId: number) {
	await applyToDaily({ protocolId: fakeProtocolId, round: 1 }, -1);
	await exec('DELETE FROM audit_fields WHERE protocol_id = :p', { p: fakeProtocolId });
}

export async function drawOf(protocolId: number) {
	return selectOne<{
		outcome: string | null;
		draw_value: number | null;
		probability: number | null;
		decided_at: Date | null;
		raw_fields: number | null;
		policy: string | null;
	}>('SELECT outcome, draw_value, probability, decided_at, raw_fields, policy FROM verification_protocols WHERE protocol_id = :p', { p: protocolId });
}

export async function standingOf(scorerId: number, batteryId: number) {
	return selectOne<{ mode: string; since: Date; reverted_at: Date | null; reason: string | null }>(
		'SELECT mode, since, reverted_at, reason FROM verification_scorers WHERE scorer_id = :s AND battery_id = :b',
		{ s: scorerId, b: batteryId }
	);
}

export async function auditEvents(action: string, entityId: string | number) {
	return select<{ action: string; new_value: string | null; old_value: string | null; reason: string | null; protocol_id: number | null }>(
		'SELECT action, new_value, old_value, reason, protocol_id FROM audit_events WHERE action = :a AND entity_id = :e ORDER BY id',
		{ a: action, e: String(entityId) }
	);
}

/**
 * Protocol fixtures for the notification tests, written straight into the tables (no workflow):
 * a minimal catalog of our own (one domain, test, norm set, battery), an examinee with a name and
 * birth date that must never appear in an e-mail, a protocol in `in_review`, and discrepancies.
 * `cleanupFixtures()` deletes everything created here.
 */
import { randomBytes } from 'node:crypto';
import { exec, select, selectOne, transaction } from '../../src/lib/server/db';
import { notifyReviewStarted } from '../../src/lib/server/mail/reminders/scheduling';
import { ACCOUNTS, MAILFAKE_URL } from './http';

export const EXAMINEE_NAME = 'Zenobia Quillfeather';
export const BIRTH_DATE = '1958-07-23';
/** Ways the birth date could be written; none may appear in a message. */
export const BIRTH_DATE_FORMS = ['1958-07-23', '23.07.1958', '07/23/1958', '23/07/1958', '1958'];

const created = { protocols: [] as number[], examinees: [] as number[] };

export async function userId(email: string): Promise<number> {
	const row = await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email });
	if (!row) throw new Error(`no user ${email} (seeded?)`);
	return row.id;
}

async function catalog(): Promise<{ testId: number; batteryId: number; normSetId: number }> {
	await exec(`INSERT IGNORE INTO domains (code, name, position) VALUES ('nt-memory', 'Notification test memory', 990)`);
	await exec(
		`INSERT IGNORE INTO tests (code, version, name, domain, direction, raw_min, raw_max, raw_decimals, reported)
		 VALUES ('nt-recall', 1, 'Notify Word Recall', 'nt-memory', 'higher_better', 0, 60, 0, 'z,standard,scaled,t,percentile')`
	);
	await exec(`INSERT IGNORE INTO norm_sets (code, name, source, version, age_rule) VALUES ('nt-norms', 'Notification test norms', 'invented', '1', '{}')`);
	const normSetId = (await selectOne<{ id: number }>(`SELECT id FROM norm_sets WHERE code = 'nt-norms' AND version = '1'`))!.id;
	await exec(`INSERT IGNORE INTO batteries (code, name, norm_set_id) VALUES ('nt-battery', 'Notify Battery', :normSetId)`, { normSetId });
	const batteryId = (await selectOne<{ id: number }>(`SELECT id FROM batteries WHERE code = 'nt-battery'`))!.id;
	const testId = (await selectOne<{ id: number }>(`SELECT id FROM tests WHERE code = 'nt-recall' AND version = 1`))!.id;
	return { testId, batteryId, normSetId };
}

export interface FixtureDiscrepancy {
	field: 'raw' | 'z' | 'standard' | 'scaled' | 't' | 'percentile';
	pass: 'first' | 'second' | 'both';
	kind: string;
	value: string | null;
	other: string | null;
	expected: string | null;
	out_of_range?: boolean;
}

export const DEFAULT_DISCREPANCIES: FixtureDiscrepancy[] = [
	{ field: 'raw', pass: 'both', kind: 'transposition', value: '29', other: '92', expected: null, out_of_range: true },
	{ field: 'standard', pass: 'second', kind: 'transposition', value: '161', other: '116', expected: '116', out_of_range: true },
	{ field: 'z', pass: 'first', kind: 'sign_flip', value: '-1.07', other: '1.07', expected: '1.07' },
	{ field: 'scaled', pass: 'first', kind: 'wrong_norm_group', value: '15', other: '13', expected: '13' }
];

export interface Fixture {
	protocolId: number;
	examineeId: number;
	code: string;
	round: number;
	reviewerId: number;
	reviewerEmail: string;
}

/** A protocol in in_review with discrepancies (not yet notified). */
export async function createReviewProtocol(opts: { discrepancies?: FixtureDiscrepancy[]; reviewer?: string } = {}): Promise<Fixture> {
	const { testId, batteryId, normSetId } = await catalog();
	const reviewerEmail = opts.reviewer ?? ACCOUNTS.reviewer;
	const [first, second, reviewerId] = await Promise.all([userId(ACCOUNTS.scorer), userId(ACCOUNTS.scorer2), userId(reviewerEmail)]);
	const code = `NT-${randomBytes(3).toString('hex').toUpperCase()}`;
	const ex = await exec(`INSERT INTO examinees (code, name, birth_date, sex) VALUES (:code, :name, :birth, 'F')`, {
		code,
		name: EXAMINEE_NAME,
		birth: BIRTH_DATE
	});
	created.examinees.push(ex.insertId);
	const p = await exec(
		`INSERT INTO protocols (examinee_id, battery_id, norm_set_id, test_date, age_text, age_months, status, round,
		   first_scorer_id, second_scorer_id, reviewer_id)
		 VALUES (:ex, :batteryId, :normSetId, '2025-03-04', '66;7', 799, 'in_review', 1, :first, :second, :reviewerId)`,
		{ ex: ex.insertId, batteryId, normSetId, first, second, reviewerId }
	);
	created.protocols.push(p.insertId);
	await exec(`INSERT INTO protocol_tests (protocol_id, position, test_id) VALUES (:id, 0, :testId)`, { id: p.insertId, testId });
	const list = opts.discrepancies ?? DEFAULT_DISCREPANCIES;
	for (const [i, d] of list.entries())
		await exec(
			`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected, out_of_range)
			 VALUES (:id, 1, :pos, 'nt-recall', :field, :pass, :kind, :value, :other, :expected, :oor)`,
			{ id: p.insertId, pos: i, ...d, oor: d.out_of_range ? 1 : 0 }
		);
	return { protocolId: p.insertId, examineeId: ex.insertId, code, round: 1, reviewerId, reviewerEmail };
}

/** createReviewProtocol + notifyReviewStarted in one transaction, as the reconciliation does. */
export async function protocolReachesReview(opts: Parameters<typeof createReviewProtocol>[0] = {}): Promise<Fixture> {
	const f = await createReviewProtocol(opts);
	await transaction(async (t) => {
		await exec(`UPDATE protocols SET status_changed_at = CURRENT_TIMESTAMP(3) WHERE id = :id`, { id: f.protocolId }, t);
		await notifyReviewStarted(f.protocolId, f.round, f.reviewerId, t);
	});
	return f;
}

export async function resolveAll(protocolId: number): Promise<void> {
	// a whole decision (migration 00024 refuses a part of one): the reviewer keeps the first pass's value
	await exec(
		`UPDATE discrepancies d JOIN protocols p ON p.id = d.protocol_id
		    SET d.resolution = 'other', d.resolved_value = COALESCE(d.value, d.other, d.expected, '0'), d.resolved_by = p.reviewer_id, d.resolved_at = CURRENT_TIMESTAMP(3)
		  WHERE d.protocol_id = :id AND d.resolved_at IS NULL`,
		{ id: protocolId }
	);
}

/** End every chain of the fixtures made so far (their reminders then send and schedule nothing). */
export async function endAllChains(): Promise<void> {
	if (created.protocols.length)
		await exec(`UPDATE protocols SET status = 'verified', verified_at = CURRENT_TIMESTAMP(3) WHERE id IN (:ids)`, { ids: created.protocols });
}

export async function cleanupFixtures(): Promise<void> {
	await endAllChains();
	if (created.protocols.length) {
		const keys = created.protocols.map((id) => `review:${id}:%`);
		for (const k of keys) {
			await exec(`DELETE FROM outbox WHERE idempotency_key LIKE :k`, { k });
			await exec(`DELETE FROM mail_log WHERE idempotency_key LIKE :k`, { k });
		}
		await exec(`DELETE FROM protocols WHERE id IN (:ids)`, { ids: created.protocols });
	}
	if (created.examinees.length) await exec(`DELETE FROM examinees WHERE id IN (:ids)`, { ids: created.examinees });
	created.protocols = [];
	created.examinees = [];
	const left = await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM protocols WHERE battery_id = (SELECT id FROM batteries WHERE code = 'nt-battery')`);
	if (left && left.n === 0) {
		await exec(`DELETE FROM batteries WHERE code = 'nt-battery'`);
		await exec(`DELETE FROM norm_sets WHERE code = 'nt-norms'`);
		await exec(`DELETE FROM tests WHERE code = 'nt-recall'`);
		await exec(`DELETE FROM domains WHERE code = 'nt-memory'`);
	}
}

// ---------------------------------------------------------------------------------------------
// The mail fake

export interface FakeMessage {
	id: string;
	receivedAt: string;
	envelope: { from: string | null; to: string[] };
	to: string;
	cc: string;
	subject: string;
	headers: Record<string, string>;
	text: string;
	html: string | null;
}

export async function allCaught(): Promise<FakeMessage[]> {
	const res = await fetch(`${MAILFAKE_URL}/messages`);
	return res.json() as Promise<FakeMessage[]>;
}

export const keyOf = (m: FakeMessage) => m.headers['x-crosstally-key'] ?? '';

/**
 * Messages for one fixture, in the order received: by idempotency key prefix and the fixture's
 * random code in the subject (the database is fresh every run but the fake keeps its catch).
 */
export async function caughtFor(f: Pick<Fixture, 'protocolId' | 'code'>): Promise<FakeMessage[]> {
	return (await allCaught()).filter((m) => keyOf(m).startsWith(`review:${f.protocolId}:`) && m.subject.includes(f.code));
}

export async function refuseNext(n: number): Promise<void> {
	await fetch(`${MAILFAKE_URL}/faults`, { method: 'POST', body: JSON.stringify({ refuse: n }) });
}

export async function mailLogRows(protocolId: number) {
	return select<{ idempotency_key: string; status: string; reminder_no: number | null; recipients: string }>(
		`SELECT idempotency_key, status, reminder_no, recipients FROM mail_log WHERE protocol_id = :id ORDER BY id`,
		{ id: protocolId }
	);
}

export async function outboxRows(protocolId: number) {
	return select<{ idempotency_key: string; dispatched_at: Date | null; attempts: number; last_error: string | null }>(
		`SELECT idempotency_key, dispatched_at, attempts, last_error FROM outbox WHERE idempotency_key LIKE :k ORDER BY id`,
		{ k: `review:${protocolId}:%` }
	);
}

/**
 * Two deliveries of one idempotency key at once: two dispatchers (several workers, as in the cluster)
 * can hand the same outbox row to the queue, and mail_log's claim keeps it to one send. The second
 * delivery finding the first at its SMTP send ('sending', within the claim lease) must wait and look
 * again, not take it for a send that stopped: before, it marked the message 'uncertain' and logged
 * "an earlier attempt stopped mid-send" for mail that was being sent as it looked.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { exec, selectOne } from '../../src/lib/server/db';
import { deliver } from '../../src/lib/server/mail/deliver';

const run = `${Date.now()}-${process.pid}`;
const fresh = `invite:concurrent-send-${run}`;
const old = `invite:stopped-send-${run}`;
const status = async (k: string) => (await selectOne<{ status: string }>('SELECT status FROM mail_log WHERE idempotency_key = :k', { k }))?.status;
const sendingRow = (k: string, since: string) =>
	exec(
		`INSERT INTO mail_log (idempotency_key, kind, recipients, subject, status, created_at, sending_at, message_id)
		 VALUES (:k, 'invite', 'someone@example.test', 'Invitation', 'sending', ${since}, ${since}, 'claim:the-other-worker')`,
		{ k }
	);

afterAll(async () => {
	await exec('DELETE FROM mail_log WHERE idempotency_key IN (:keys)', { keys: [fresh, old] });
});

describe('a second delivery of a key that is being sent', () => {
	it('while the other send is under way (handed to SMTP just now): retries later and leaves the row as it is', async () => {
		await sendingRow(fresh, 'CURRENT_TIMESTAMP(3)');
		await expect(deliver({ kind: 'invite', key: fresh, payload: {} })).rejects.toThrow(/being sent by another worker/);
		expect(await status(fresh)).toBe('sending');
		// the other send ends: the retry finds it sent and sends nothing
		await exec(`UPDATE mail_log SET status = 'sent', sent_at = CURRENT_TIMESTAMP(3) WHERE idempotency_key = :k`, { k: fresh });
		expect(await deliver({ kind: 'invite', key: fresh, payload: {} })).toBe('already-sent');
	});

	it('when the send began longer ago than the claim lease (the default 10 minutes; here an hour): uncertain, never sent again', async () => {
		await sendingRow(old, 'CURRENT_TIMESTAMP(3) - INTERVAL 1 HOUR');
		expect(await deliver({ kind: 'invite', key: old, payload: {} })).toBe('uncertain');
		expect(await status(old)).toBe('uncertain');
	});
});

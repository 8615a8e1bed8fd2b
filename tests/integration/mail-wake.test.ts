/**
 * The dispatcher wakes on commit (issue 18, src/lib/server/mail/wake.ts), with the real app, worker,
 * Redis, MariaDB and mail fake npm test starts. The worker here polls the outbox only once a minute
 * (DISPATCH_INTERVAL_MS=60000), so an e-mail caught within a second or two of its commit was
 * dispatched on the wake-up, not found by the poll. The wake-up is published after COMMIT, never
 * inside the transaction: a transaction that rolls back publishes nothing and sends nothing.
 */
import { describe, expect, it } from 'vitest';
import { randomUUID } from 'node:crypto';
import { Redis } from 'ioredis';
import { signedIn, caughtMail, waitFor } from '../helpers/http';
import { restoreMailServicesAfterEach, sleep } from '../helpers/mail-crashes';
import { startWorker, stopWorker } from '../helpers/services';
import { selectOne, transaction } from '../../src/lib/server/db';
import { config } from '../../src/lib/server/config';
import { enqueueMail } from '../../src/lib/server/mail/outbox';
import { MAIL_WAKE_CHANNEL } from '../../src/lib/server/mail/wake';

const LONG_POLL = { DISPATCH_INTERVAL_MS: '60000' };

restoreMailServicesAfterEach();

type Caught = Awaited<ReturnType<typeof caughtMail>>[number] & { receivedAt: string };
const caught = async (email: string) => (await caughtMail(email)) as Caught[];

async function invite(tag: string): Promise<{ email: string; userId: number; respondedAt: number }> {
	const email = `${tag}-${Date.now()}@clinic.test`;
	const admin = await signedIn('admin');
	const r = await admin.action('/people?/invite', { name: `Wake ${tag}`, email, roles: ['scorer'] });
	const respondedAt = Date.now(); // the invitation's transaction committed before the answer
	expect(r.body.type).toBe('success');
	const user = await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email });
	return { email, userId: user!.id, respondedAt };
}

/** A worker that polls once a minute, started with nothing pending (its first scan on start is done). */
async function longPollWorker() {
	await stopWorker();
	await startWorker(LONG_POLL);
	await waitFor(async () => (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM outbox WHERE dispatched_at IS NULL'))?.n === 0, 30_000);
	await sleep(1_000); // past the scans of the start and of the subscription's first connection
}

describe('the dispatcher wakes on commit', () => {
	it('an invitation committed by the app is caught within a second or two, with the poll a minute away', async () => {
		await longPollWorker();
		// the first message after start warms the worker up (a cold render and SMTP connection take longer);
		// 10 s is still far from the 60 s poll
		const first = await invite('wake-warm');
		await waitFor(async () => (await caught(first.email)).length > 0, 10_000, 50);
		const m = await invite('wake');
		const [mail] = await waitFor(
			async () => {
				const list = await caught(m.email);
				return list.length ? list : null;
			},
			10_000,
			50
		);
		const latency = Date.parse(mail.receivedAt) - m.respondedAt;
		console.log(`[mail-wake] commit → caught: ${latency} ms (the fallback poll is 60,000 ms away)`);
		// the answer came after COMMIT, so this is an upper bound of commit → caught
		expect(latency).toBeLessThan(1_000);
	}, 120_000);

	it('the wake-up is published after COMMIT and not for a rolled-back transaction, which sends nothing', async () => {
		await stopWorker(); // nothing else publishes while this listens: the worker writes next reminders
		const { email, userId } = await invite('wake-rollback');
		const heard: number[] = [];
		const sub = new Redis(config.redisUrl);
		try {
			await sub.subscribe(MAIL_WAKE_CHANNEL);
			sub.on('message', () => heard.push(Date.now()));
			await sleep(300); // the invitation's own wake-up, if it was late, is behind us
			heard.length = 0;

			// 1. rolled back: no wake-up, no outbox row
			const rolledBack = `invite:${userId}:${randomUUID()}`;
			await expect(
				transaction(async (t) => {
					await enqueueMail('invite', rolledBack, { userId, invitedBy: 'Rollback test' }, t);
					throw new Error('rolled back on purpose');
				})
			).rejects.toThrow('rolled back on purpose');
			await sleep(1_000);
			expect(heard).toEqual([]);
			expect(await selectOne('SELECT id FROM outbox WHERE idempotency_key = :k', { k: rolledBack })).toBeNull();

			// 2. committed, 500 ms after the row was written: one wake-up, after COMMIT, not while it waited
			const committed = `invite:${userId}:${randomUUID()}`;
			await transaction(async (t) => {
				await enqueueMail('invite', committed, { userId, invitedBy: 'Commit test' }, t);
				await sleep(500);
				expect(heard).toEqual([]); // a wake-up inside the transaction would have arrived by now
			});
			const committedAt = Date.now();
			await waitFor(async () => heard.length > 0, 2_000, 20);
			await sleep(300);
			expect(heard).toHaveLength(1);
			// the hook runs when COMMIT answered and publishes on the next turn: at or after committedAt - a few ms
			expect(heard[0]).toBeGreaterThanOrEqual(committedAt - 50);

			// 3. a worker (polling once a minute) sends what committed, once; the rolled-back row never existed
			await startWorker(LONG_POLL); // its first scan on start finds the committed row
			await waitFor(async () => (await caught(email)).length >= 2, 30_000, 100);
			await sleep(1_500);
			const keys = (await caught(email)).map((x) => x.headers['x-crosstally-key']);
			expect(keys).toHaveLength(2); // the app's invitation and the committed one, once each
			expect(keys).toContain(committed);
			expect(keys).not.toContain(rolledBack);
		} finally {
			sub.disconnect();
		}
	}, 120_000);
});

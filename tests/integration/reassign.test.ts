/**
 * Reassigning the reviewer of a protocol in review through the protocol page's action: the service
 * itself tells the new reviewer, in the transaction of the change (the outbox row exists as soon as
 * the change does), and a refused change writes neither the assignment nor an e-mail.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { selectOne } from '../../src/lib/server/db';
import { ACCOUNTS, signedIn, type Client } from '../helpers/http';
import { cleanupFixtures, outboxRows, protocolReachesReview, userId } from '../helpers/review-fixtures';

let lead: Client;
let lee: number;
let sam: number;

beforeAll(async () => {
	lead = await signedIn('lead');
	lee = await userId(ACCOUNTS.lead); // holds the reviewer role too (db/seeds/accounts.ts)
	sam = await userId(ACCOUNTS.scorer);
});

afterAll(async () => {
	await cleanupFixtures();
});

const reviewerOf = async (id: number) => (await selectOne<{ reviewer_id: number }>('SELECT reviewer_id FROM protocols WHERE id = :id', { id }))?.reviewer_id;

describe('reassigning the reviewer of a protocol in review', () => {
	it('puts the new reviewer’s first e-mail in the outbox with the change', async () => {
		const f = await protocolReachesReview();
		const before = (await outboxRows(f.protocolId)).map((r) => r.idempotency_key);
		expect(before).toEqual([`review:${f.protocolId}:r1:u${f.reviewerId}:0`]);
		const r = await lead.action(`/protocols/${f.protocolId}?/reassign`, { duty: 'reviewer', userId: String(lee), reason: 'Rita is away this week' });
		expect(r.body.type, JSON.stringify(r.body)).toBe('success');
		expect(await reviewerOf(f.protocolId)).toBe(lee);
		const keys = (await outboxRows(f.protocolId)).map((x) => x.idempotency_key);
		expect(keys).toContain(`review:${f.protocolId}:r1:u${lee}:0`);
	});

	it('a refused change (a scorer of the protocol as its reviewer) writes no assignment and no e-mail', async () => {
		const f = await protocolReachesReview();
		const r = await lead.action(`/protocols/${f.protocolId}?/reassign`, { duty: 'reviewer', userId: String(sam), reason: 'Sam could review it' });
		expect(r.body.type).toBe('failure');
		expect(await reviewerOf(f.protocolId)).toBe(f.reviewerId);
		expect((await outboxRows(f.protocolId)).map((x) => x.idempotency_key)).toEqual([`review:${f.protocolId}:r1:u${f.reviewerId}:0`]);
	});
});

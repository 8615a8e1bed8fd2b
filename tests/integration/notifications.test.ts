/**
 * Reviewer notifications against the real MariaDB, Redis, worker and mail fake that npm test
 * starts. The suite's reminder interval is a day (so the protocols other files leave in review stay
 * quiet); each test here saves the site setting of a reminder every 3 s. Fixtures are inserted straight
 * into the tables; the tests call notifyReviewStarted / notifyReviewerChanged as the workflow does.
 */
import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { exec, transaction } from '../../src/lib/server/db';
import { config } from '../../src/lib/server/config';
import { listProtocolMail } from '../../src/lib/server/mail/reminders/history';
import { nextReviewReminder, notifyReviewStarted, notifyReviewerChanged } from '../../src/lib/server/mail/reminders/scheduling';
import { saveReviewMailSettings, REVIEW_MAIL_SETTING } from '../../src/lib/server/mail/reminders/settings';
import { ACCOUNTS, waitFor } from '../helpers/http';
import {
	BIRTH_DATE_FORMS,
	EXAMINEE_NAME,
	caughtFor,
	cleanupFixtures,
	endAllChains,
	keyOf,
	outboxRows,
	protocolReachesReview,
	resolveAll,
	userId,
	type FakeMessage,
	type Fixture
} from '../helpers/review-fixtures';

/** A reminder every 3 s while these tests run (0.05 min × 60 000 ms = 3 000 ms). */
const INTERVAL_MINUTES = 0.05;
const INTERVAL_MS = 3_000;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

const byKey = (msgs: FakeMessage[], key: string) => msgs.filter((m) => keyOf(m) === key);
const keyFor = (protocolId: number, reviewerId: number, n: number, round = 1) => `review:${protocolId}:r${round}:u${reviewerId}:${n}`;

async function waitForKey(f: Fixture, key: string, timeoutMs = 20_000): Promise<FakeMessage> {
	return waitFor(async () => byKey(await caughtFor(f), key)[0], timeoutMs, 150);
}

beforeEach(async () => {
	await saveReviewMailSettings({ reminderIntervalMinutes: INTERVAL_MINUTES, escalateAfterReminders: config.escalateAfterReminders });
});

afterEach(async () => {
	await endAllChains();
	await exec(`DELETE FROM settings WHERE name = :n`, { n: REVIEW_MAIL_SETTING });
});

afterAll(async () => {
	await cleanupFixtures();
});

describe('review notifications', () => {
	it('sends the reviewer a first e-mail when a protocol reaches in_review, with the code and never the name or birth date', async () => {
		const f = await protocolReachesReview();
		const m = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));

		expect(m.envelope.to).toEqual([ACCOUNTS.reviewer]);
		expect(m.cc).toBe('');
		expect(m.subject).toBe(`Review needed: protocol ${f.code} (4 discrepancies)`);
		expect(m.html, 'an HTML part').toBeTruthy();
		expect(m.text, 'a plain-text part').toContain(f.code);
		for (const part of [m.subject, m.text, m.html!]) {
			expect(part).not.toContain(EXAMINEE_NAME);
			expect(part).not.toContain('Zenobia');
			for (const d of BIRTH_DATE_FORMS) expect(part).not.toContain(d);
		}
		const link = `${config.origin}/protocols/${f.protocolId}/review`;
		expect(m.text).toContain(link);
		expect(m.html).toContain(`href="${link}"`);
		// per discrepancy: test, field, both values with the differing characters marked, recomputed, kind in words
		expect(m.text).toContain('Notify Word Recall (nt-recall), standard score (second pass)');
		expect(m.text).toMatch(/First pass: {2}1\[16\]\s/); // both swapped digits marked
		expect(m.text).toMatch(/Second pass: 1\[61\]\s/);
		expect(m.text).toContain('Recomputed:  116');
		// kind names as the Review chip shows them (one vocabulary: src/lib/scoring/kinds.ts), never the code
		expect(m.text).toContain('Kind: Digits swapped (out of range): Two neighbouring digits swapped');
		expect(m.text).toContain('Kind: Direction wrong way round: The direction is the wrong way round');
		expect(m.text).toContain('Kind: Wrong norm group');
		expect(m.text).not.toMatch(/transposition|sign flip|sign_flip|wrong norm group/);
		expect(m.text).toMatch(/First pass: {2}\[-\]1\.07/);
		expect(m.html).toMatch(/<mark[^>]*>-<\/mark>1\.07/);
		expect(m.html).toContain('Two neighbouring digits swapped');

		await waitFor(async () => (await listProtocolMail(f.protocolId)).find((e) => e.status === 'sent'));
		const log = await listProtocolMail(f.protocolId);
		expect(log[0]).toMatchObject({
			kind: 'review_first',
			label: 'First e-mail',
			reminderNo: 0,
			round: 1,
			reviewerId: f.reviewerId,
			to: [ACCOUNTS.reviewer],
			cc: [],
			status: 'sent'
		});
		expect(log[0].sentAt).toBeInstanceOf(Date);
	});

	it('with e-mail detail set to counts, the message gives how many of each kind and the link, and no value at all', async () => {
		await saveReviewMailSettings({ reminderIntervalMinutes: INTERVAL_MINUTES, escalateAfterReminders: config.escalateAfterReminders, detail: 'counts' });
		const f = await protocolReachesReview();
		const m = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		expect(m.subject).toBe(`Review needed: protocol ${f.code} (4 discrepancies)`);
		// the fixture's four: 2 transpositions (raw 29/92, standard 161/116), 1 sign flip, 1 wrong norm group
		expect(m.text).toContain('Discrepancies: 4 (2 Digits swapped, 1 Direction wrong way round, 1 Wrong norm group)');
		expect(m.text).toContain(`${config.origin}/protocols/${f.protocolId}/review`);
		for (const part of [m.text, m.html!])
			for (const v of ['161', '116', '1.07', '-1.07'])
				expect(
					part
						.replaceAll(f.code, '')
						.replace(/#[0-9a-f]{3,6}\b/gi, '')
						.replace(/\d{4}-\d{2}-\d{2}/g, '')
				).not.toMatch(new RegExp(`(^|[^\\d.])${v.replace('.', '\\.')}($|[^\\d])`));
	});

	it('calling notifyReviewStarted twice (a retried request) still sends one first e-mail', async () => {
		const f = await protocolReachesReview();
		await transaction((t) => notifyReviewStarted(f.protocolId, f.round, f.reviewerId, t));
		await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		await sleep(1_500);
		expect(byKey(await caughtFor(f), keyFor(f.protocolId, f.reviewerId, 0))).toHaveLength(1);
	});

	it('sends a reminder after the interval, listing only what is still open', async () => {
		const f = await protocolReachesReview();
		const first = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		// the raw score the passes wrote differently (29, 92): the Review screen's words, never "both passes" wrong
		expect(first.text).toContain('raw score (the passes disagree: one or both may be wrong)');
		expect(first.text).not.toContain('(both passes)');
		// one discrepancy resolved before the reminder goes out
		await exec(
			`UPDATE discrepancies SET resolution = 'other', resolved_value = '1', resolved_by = :by, resolved_at = CURRENT_TIMESTAMP(3) WHERE protocol_id = :id AND position = 0`,
			{ id: f.protocolId, by: f.reviewerId }
		);
		const due = await waitFor(() => nextReviewReminder(f.protocolId));
		expect(due.reminderNo).toBe(1);
		const r1 = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 1), INTERVAL_MS + 15_000);
		const gap = Date.parse(r1.receivedAt) - Date.parse(first.receivedAt);
		expect(gap).toBeGreaterThanOrEqual(INTERVAL_MS * 0.9);
		expect(r1.envelope.to).toEqual([ACCOUNTS.reviewer]);
		expect(r1.subject).toBe(`Reminder 1: protocol ${f.code} has 3 open discrepancies`);
		expect(r1.text).toContain('Still open');
		// how long it has waited, from the protocol's status_changed_at (the wording: tests/unit/review-mail.test.ts)
		expect(r1.text).toMatch(/Waiting for review since \d{4}-\d{2}-\d{2} \d{2}:\d{2} \S+ \(less than a minute\)\./);
		expect(r1.text).not.toContain('raw score (the passes disagree');
		expect(r1.text).not.toContain(EXAMINEE_NAME);
		const r2 = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 2), INTERVAL_MS + 15_000);
		expect(Date.parse(r2.receivedAt) - Date.parse(r1.receivedAt)).toBeGreaterThanOrEqual(INTERVAL_MS * 0.9);
		const log = await listProtocolMail(f.protocolId);
		expect(log.slice(0, 3).map((e) => e.label)).toEqual(['First e-mail', 'Reminder 1', 'Reminder 2']);
	}, 60_000);

	it('copies the active leads in after the configured number of reminders (escalation)', async () => {
		// an allowance of 0 reminders: the first e-mail goes to the reviewer alone, reminder 1 copies the
		// leads in (one interval of waiting; the escalated wording is checked in tests/unit/review-mail.test.ts)
		await saveReviewMailSettings({ reminderIntervalMinutes: INTERVAL_MINUTES, escalateAfterReminders: 0 });
		const f = await protocolReachesReview();
		const first = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		expect(first.cc, 'the first e-mail is within the allowance').toBe('');
		const r1 = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 1), INTERVAL_MS + 15_000);
		expect(r1.envelope.to.sort()).toEqual([ACCOUNTS.reviewer, ACCOUNTS.lead].sort());
		expect(r1.cc).toContain(ACCOUNTS.lead);
		expect(r1.subject).toBe(`Escalated reminder 1: protocol ${f.code} has 4 open discrepancies`);
		await waitFor(async () => (await listProtocolMail(f.protocolId)).find((e) => e.reminderNo === 1 && e.status === 'sent'));
		const entry = (await listProtocolMail(f.protocolId)).find((e) => e.reminderNo === 1)!;
		expect(entry).toMatchObject({ label: 'Reminder 1 (leads copied in)', to: [ACCOUNTS.reviewer], cc: [ACCOUNTS.lead] });
	}, 60_000);

	it('a lead who is the reviewer is not copied in on their own reminder', async () => {
		await saveReviewMailSettings({ reminderIntervalMinutes: INTERVAL_MINUTES, escalateAfterReminders: 0 });
		const f = await protocolReachesReview({ reviewer: ACCOUNTS.lead });
		const r1 = await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 1), 2 * INTERVAL_MS + 15_000);
		expect(r1.envelope.to).toEqual([ACCOUNTS.lead]);
		expect(r1.cc).toBe('');
	}, 60_000);

	it('sends no reminder once every discrepancy is resolved', async () => {
		const f = await protocolReachesReview();
		await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		await resolveAll(f.protocolId);
		await sleep(3 * INTERVAL_MS + 2_000);
		const msgs = await caughtFor(f);
		expect(msgs.map(keyOf)).toEqual([keyFor(f.protocolId, f.reviewerId, 0)]);
		// at most the one reminder that was already scheduled exists, and nothing after it
		const keys = (await outboxRows(f.protocolId)).map((r) => r.idempotency_key);
		expect(keys.filter((k) => k.endsWith(':2'))).toEqual([]);
		expect(await nextReviewReminder(f.protocolId)).toBeNull();
	}, 60_000);

	it('on reassignment the new reviewer gets their own first e-mail and reminders; the old reviewer gets no more', async () => {
		const f = await protocolReachesReview();
		await waitForKey(f, keyFor(f.protocolId, f.reviewerId, 0));
		const lead = await userId(ACCOUNTS.lead);
		await transaction(async (t) => {
			await exec(`UPDATE protocols SET reviewer_id = :lead WHERE id = :id`, { lead, id: f.protocolId }, t);
			await notifyReviewerChanged(f.protocolId, f.round, lead, t);
		});
		const changedAt = Date.now();
		const n0 = await waitForKey(f, keyFor(f.protocolId, lead, 0));
		expect(n0.envelope.to).toEqual([ACCOUNTS.lead]);
		expect(n0.subject).toBe(`Review needed: protocol ${f.code} (4 discrepancies)`);
		await waitForKey(f, keyFor(f.protocolId, lead, 1), INTERVAL_MS + 15_000);
		await sleep(Math.max(0, changedAt + 2 * INTERVAL_MS + 1_000 - Date.now()));
		const toOld = (await caughtFor(f)).filter((m) => m.envelope.to.includes(ACCOUNTS.reviewer));
		// the first e-mail, and at most a reminder that was already on its way when the change committed
		expect(toOld.filter((m) => Date.parse(m.receivedAt) > changedAt + 1_000)).toEqual([]);

		// back to the first reviewer in the same round: a fresh chain of their own
		await transaction(async (t) => {
			await exec(`UPDATE protocols SET reviewer_id = :r WHERE id = :id`, { r: f.reviewerId, id: f.protocolId }, t);
			await notifyReviewerChanged(f.protocolId, f.round, f.reviewerId, t);
		});
		const again = await waitForKey(f, `review:${f.protocolId}:r1:u${f.reviewerId}.2:0`);
		expect(again.envelope.to).toEqual([ACCOUNTS.reviewer]);
		const backAt = Date.now();
		await sleep(2 * INTERVAL_MS + 1_000);
		const toLeadAfter = (await caughtFor(f)).filter((m) => m.envelope.to.includes(ACCOUNTS.lead) && Date.parse(m.receivedAt) > backAt + 1_000);
		expect(toLeadAfter).toEqual([]);
		// a repeated call for the reviewer already assigned is a no-op
		await transaction((t) => notifyReviewerChanged(f.protocolId, f.round, f.reviewerId, t));
		expect((await outboxRows(f.protocolId)).filter((r) => r.idempotency_key.endsWith(':0'))).toHaveLength(3);
	}, 90_000);
});

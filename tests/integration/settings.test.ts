/**
 * The admin's Settings screen (/settings): the review e-mail settings (reminder interval,
 * escalation, detail) through the page's form action, as a browser's form post would send them.
 * Only admins (access table: '/settings' GET and POST for admin); bad input answers 400 naming the
 * field; a change is in the audit trail; the next review e-mail follows the saved detail.
 */
import { afterAll, afterEach, describe, expect, it } from 'vitest';
import { exec, selectOne } from '../../src/lib/server/db';
import { config } from '../../src/lib/server/config';
import { REVIEW_MAIL_SETTING } from '../../src/lib/server/mail/reminders/settings';
import { ACCOUNTS, signedIn, waitFor } from '../helpers/http';
import { caughtFor, cleanupFixtures, endAllChains, keyOf, protocolReachesReview, type FakeMessage, type Fixture } from '../helpers/review-fixtures';

const keyFor = (protocolId: number, reviewerId: number, n: number) => `review:${protocolId}:r1:u${reviewerId}:${n}`;
const firstMail = (f: Fixture): Promise<FakeMessage> =>
	waitFor(async () => (await caughtFor(f)).filter((m) => keyOf(m) === keyFor(f.protocolId, f.reviewerId, 0))[0], 30_000, 150);

/** The form as the page posts it (numbers as typed, the radio's value). */
const form = (interval: string, escalate: string, detail: string) => ({ reminder_interval_minutes: interval, escalate_after_reminders: escalate, detail });
/** The settings as stored (the row the service reads). */
async function stored(): Promise<Record<string, unknown> | null> {
	const row = await selectOne<{ value: unknown }>('SELECT value FROM settings WHERE name = :n', { n: REVIEW_MAIL_SETTING });
	return row ? (typeof row.value === 'string' ? JSON.parse(row.value) : (row.value as Record<string, unknown>)) : null;
}
// the test run's own interval (REMINDER_INTERVAL_MINUTES, 0.05 in npm test) is kept, so other tests' reminders are not slowed
const interval = String(config.reminderIntervalMinutes);

afterEach(async () => {
	await endAllChains();
	await exec('DELETE FROM settings WHERE name = :n', { n: REVIEW_MAIL_SETTING });
});
afterAll(async () => {
	await cleanupFixtures();
});

describe('Settings (admin)', () => {
	it('an admin sees the three settings and saves them; the change is in the audit trail with before and after', async () => {
		const admin = await signedIn('admin');
		const page = await admin.get('/settings');
		expect(page.status).toBe(200);
		const html = await page.text();
		for (const label of ['Reminder interval (minutes)', 'Copy the leads in after this many reminders', 'Full list', 'Counts and a link only'])
			expect(html).toContain(label);
		const before = await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM audit_events WHERE entity = 'settings'");

		const r = await admin.action('/settings', form(interval, '5', 'counts'));
		expect(r.body.type, JSON.stringify(r.body)).toBe('success');
		expect(await stored()).toEqual({ reminderIntervalMinutes: config.reminderIntervalMinutes, escalateAfterReminders: 5, detail: 'counts' });
		const ev = await selectOne<{ action: string; entity_id: string; old_value: string; new_value: string; actor: string }>(
			"SELECT e.action, e.entity_id, e.old_value, e.new_value, u.email AS actor FROM audit_events e JOIN users u ON u.id = e.actor_id WHERE e.entity = 'settings' ORDER BY e.id DESC LIMIT 1"
		);
		expect((await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM audit_events WHERE entity = 'settings'"))!.n).toBe(Number(before!.n) + 1);
		expect(ev).toMatchObject({ action: 'update', entity_id: REVIEW_MAIL_SETTING, actor: ACCOUNTS.admin });
		expect(JSON.parse(ev!.new_value)).toMatchObject({ escalateAfterReminders: 5, detail: 'counts' });
		expect(JSON.parse(ev!.old_value)).toMatchObject({ detail: 'full' }); // the default before any save (REVIEW_MAIL_DETAIL unset)
		// the page shows the saved values
		expect(await (await admin.get('/settings')).text()).toMatch(/value="counts"[^>]*checked|checked[^>]*value="counts"/);
	});

	it('a lead, a reviewer and a scorer are refused (403: the access table allows admins only), and the settings stay as they were', async () => {
		for (const who of ['lead', 'reviewer', 'scorer'] as const) {
			const c = await signedIn(who);
			expect((await c.get('/settings')).status, `${who} GET`).toBe(403);
			const r = await c.action('/settings', form(interval, '1', 'counts'));
			expect(r.status, `${who} POST`).toBe(403);
		}
		expect(await stored()).toBeNull();
		// the menu offers Settings to admins only
		expect(await (await (await signedIn('admin')).get('/')).text()).toContain('href="/settings"');
		expect(await (await (await signedIn('lead')).get('/')).text()).not.toContain('href="/settings"');
	});

	it('bad input answers 400 with a message naming the field, and nothing is saved', async () => {
		const admin = await signedIn('admin');
		const cases: [Record<string, string>, string][] = [
			[form('0', '3', 'full'), 'Reminder interval: must be above 0 minutes'],
			[form('-5', '3', 'full'), 'Reminder interval: must be above 0 minutes'],
			[form('129601', '3', 'full'), 'Reminder interval: at most 129600 minutes (90 days)'], // 60 × 24 × 90 = 129600
			[form('abc', '3', 'full'), 'Reminder interval: enter a number of minutes'],
			[form(interval, '2.5', 'full'), 'Escalation: enter a whole number of reminders'],
			[form(interval, '-1', 'full'), 'Escalation: 0 or more reminders'],
			[form(interval, '1001', 'full'), 'Escalation: at most 1000 reminders'],
			[form(interval, '3', 'everything'), 'E-mail detail: choose "full" or "counts"']
		];
		for (const [fields, message] of cases) {
			const r = await admin.action('/settings', fields);
			expect(r.body.type, JSON.stringify(fields)).toBe('failure');
			expect(r.body.status, JSON.stringify(fields)).toBe(400);
			// the action's data is serialized (devalue): the message sits in it as a JSON string
			expect(r.body.data, JSON.stringify(fields)).toContain(JSON.stringify(message).slice(1, -1));
		}
		expect(await stored()).toBeNull();
	});

	it('the next review e-mail follows the saved detail: counts only after "counts", the full list again after "full"', async () => {
		const admin = await signedIn('admin');
		expect((await admin.action('/settings', form(interval, '3', 'counts'))).body.type).toBe('success');
		const a = await protocolReachesReview();
		const ma = await firstMail(a);
		// the fixture's four discrepancies: 2 digits swapped (raw 29/92, standard 161/116), 1 direction, 1 wrong norm group
		expect(ma.text).toContain('Discrepancies: 4 (2 Digits swapped, 1 Direction wrong way round, 1 Wrong norm group)');
		expect(ma.text).not.toContain('Recomputed:');
		expect(ma.text).not.toContain('161');

		expect((await admin.action('/settings', form(interval, '3', 'full'))).body.type).toBe('success');
		const b = await protocolReachesReview();
		const mb = await firstMail(b);
		expect(mb.text).toContain('Recomputed:  116');
		expect(mb.text).toMatch(/Second pass: 1\[61\]\s/);
	}, 90_000);
});

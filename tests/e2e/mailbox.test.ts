/**
 * End to end: a protocol reaches review, the admin reads the reviewer's e-mail in the Mailbox
 * screen (rendered as the recipient sees it), and the reviewer follows its link to the Review
 * screen of that protocol.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, waitFor } from '../helpers/http';
import { caughtFor, cleanupFixtures, endAllChains, protocolReachesReview, EXAMINEE_NAME, type Fixture } from '../helpers/review-fixtures';

let browser: Browser;
let f: Fixture;

beforeAll(async () => {
	browser = await launch();
	f = await protocolReachesReview();
	await waitFor(async () => (await caughtFor(f)).find((m) => m.headers['x-crosstally-key']?.endsWith(':0')), 20_000);
	await endAllChains(); // no reminders while the test reads the mailbox
});

afterAll(async () => {
	await browser?.close();
	await cleanupFixtures();
});

describe('Mailbox → Review screen', () => {
	it('the admin finds the reviewer’s e-mail in the Mailbox, and its link leads the reviewer to the Review screen', async () => {
		const subject = `Review needed: protocol ${f.code} (4 discrepancies)`;
		const admin = await browser.newContext();
		const page = await admin.newPage();
		await signIn(page, ACCOUNTS.admin, DEMO_PASSWORD);
		await page.goto(`${BASE_URL}/mailbox`);
		const row = page.getByTestId('mailbox').locator('tr', { hasText: subject });
		await expect.poll(() => row.count()).toBe(1);
		await expect.poll(() => row.innerText()).toContain(ACCOUNTS.reviewer);
		await row.getByRole('link', { name: subject }).click();
		await page.waitForURL(/\/mailbox\/[\w-]+$/);
		expect(await page.getByTestId('mail-to').innerText()).toContain(ACCOUNTS.reviewer);

		// the HTML part, as the recipient sees it, in the sandboxed frame
		const frame = page.frameLocator('iframe[title="Message"]');
		await expect.poll(() => frame.locator('body').innerText()).toContain(f.code);
		const body = await frame.locator('body').innerText();
		expect(body).not.toContain(EXAMINEE_NAME);
		expect(body).toContain('Digits swapped'); // the kind as the Review chip names it (src/lib/scoring/kinds.ts), never its code
		const href = await frame.getByRole('link', { name: 'Open the Review screen' }).getAttribute('href');
		expect(href).toBe(`${BASE_URL}/protocols/${f.protocolId}/review`);

		// the plain-text part carries the same link
		await page.getByRole('tab', { name: 'Plain text' }).click();
		expect(await page.getByTestId('mail-text').innerText()).toContain(href!);
		await admin.close();

		// the reviewer follows the link (signing in when asked)
		const reviewer = await browser.newContext();
		const rp = await reviewer.newPage();
		let res = await rp.goto(href!);
		if (new URL(rp.url()).pathname.startsWith('/signin')) {
			await rp.fill('#email', ACCOUNTS.reviewer);
			await rp.fill('#password', DEMO_PASSWORD);
			await Promise.all([rp.waitForURL((u) => !u.pathname.startsWith('/signin') || u.searchParams.has('error')), rp.click('button[type=submit]')]);
			res = await rp.goto(href!);
		}
		expect(new URL(rp.url()).pathname).toBe(`/protocols/${f.protocolId}/review`);
		expect(res?.status(), 'the Review screen answers without an error').toBeLessThan(400);
		expect(await rp.getByTestId('error-page').count(), 'not the error page').toBe(0);
		await reviewer.close();
	}, 60_000);
});

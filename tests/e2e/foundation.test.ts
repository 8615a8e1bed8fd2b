/**
 * End to end in Chromium: every role signs in and sees its own navigation, may open its screens and
 * is refused the others; an invitation e-mail caught by the mail fake sets a password; repeated
 * failed sign-ins are throttled.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, caughtMail, waitFor } from '../helpers/http';
import { seriousViolations, describeViolations } from '../helpers/axe';
import { createUser } from '../../src/lib/server/users';
import { closeDb } from '../../src/lib/server/db';

let browser: Browser;
beforeAll(async () => {
	browser = await launch();
});
afterAll(async () => {
	await browser?.close();
	await closeDb();
});

const ROLES: { who: keyof typeof ACCOUNTS; nav: string[]; allowed: string[]; refused: string[] }[] = [
	{
		who: 'scorer',
		nav: ['Worklist', 'Protocols'],
		allowed: ['/', '/protocols'],
		refused: ['/people', '/catalog', '/audit', '/mailbox', '/settings', '/protocols/new']
	},
	{ who: 'reviewer', nav: ['Worklist', 'Protocols'], allowed: ['/', '/protocols'], refused: ['/people', '/catalog', '/audit', '/protocols/new'] },
	{
		who: 'lead',
		nav: ['Worklist', 'Protocols', 'Audit', 'Catalog'],
		allowed: ['/', '/protocols', '/protocols/new', '/catalog', '/audit'],
		refused: ['/people', '/mailbox', '/settings']
	},
	{
		who: 'admin',
		nav: ['Worklist', 'Catalog', 'People', 'Mailbox', 'Settings'],
		allowed: ['/', '/people', '/mailbox', '/catalog', '/settings'],
		refused: ['/audit', '/protocols', '/protocols/new']
	}
];

describe('roles in the browser', () => {
	it.each(ROLES)(
		'$who sees its own navigation and screens',
		async ({ who, nav, allowed, refused }) => {
			const ctx = await browser.newContext({ bypassCSP: true });
			const page = await ctx.newPage();
			await signIn(page, ACCOUNTS[who], DEMO_PASSWORD);
			expect(new URL(page.url()).pathname).toBe('/');
			const links = await page.getByRole('navigation', { name: 'Main' }).getByRole('link').allInnerTexts();
			expect(links.map((l) => l.trim()).filter((l) => l !== 'Crosstally')).toEqual(nav);
			for (const path of allowed) {
				const res = await page.goto(`${BASE_URL}${path}`);
				expect(res?.status(), `${who} ${path}`).toBe(200);
				expect(await page.getByTestId('error-page').count(), `${who} ${path}`).toBe(0);
			}
			for (const path of refused) {
				const res = await page.goto(`${BASE_URL}${path}`);
				expect(res?.status(), `${who} ${path}`).toBe(403);
				expect(await page.getByTestId('error-page').innerText()).toContain('Your role does not include this screen');
			}
			await page.goto(`${BASE_URL}/`);
			const v = await seriousViolations(page);
			expect(v, describeViolations(v)).toEqual([]);
			await page.getByRole('button', { name: 'Sign out' }).click();
			await page.waitForURL(/\/signin/);
			const back = await page.goto(`${BASE_URL}/protocols`);
			expect(new URL(page.url()).pathname).toBe('/signin');
			expect(back?.status()).toBe(200);
			await ctx.close();
		},
		90_000
	);
});

describe('invitation by e-mail, in the browser', () => {
	it('an admin invites; the link in the caught e-mail sets a password; the new person signs in', async () => {
		const email = `e2e-${Date.now()}@clinic.test`;
		const admin = await (await browser.newContext()).newPage();
		await signIn(admin, ACCOUNTS.admin, DEMO_PASSWORD);
		await admin.goto(`${BASE_URL}/people`);
		await admin.fill('#invite-name', 'Ines Varga');
		await admin.fill('#invite-email', email);
		await admin.getByLabel('Scorer', { exact: true }).last().check();
		await admin.getByRole('button', { name: 'Send invitation', exact: true }).click();
		await admin.getByText('Invitation sent.').waitFor();
		expect(await admin.getByTestId('people-table').innerText()).toContain(email);
		const [mail] = await waitFor(async () => {
			const m = await caughtMail(email);
			return m.length ? m : null;
		});
		const link = mail.text.match(/https?:\/\/\S+\/set-password\/[\w-]+/)![0];
		const fresh = await (await browser.newContext()).newPage();
		await fresh.goto(link.replace(/^https?:\/\/[^/]+/, BASE_URL));
		await fresh.fill('#password', 'my own long password');
		await fresh.fill('#confirm', 'my own long password');
		await fresh.getByRole('button', { name: 'Set password' }).click();
		await fresh.waitForURL(/\/signin\?notice=password-set/);
		await fresh.getByText('Your password is set').waitFor();
		await signIn(fresh, email, 'my own long password');
		expect(await fresh.getByTestId('signed-in-as').innerText()).toBe('Ines Varga');
	}, 90_000);
});

describe('throttled sign-in, in the browser', () => {
	it('after five wrong passwords the sixth attempt is refused with a clear message', async () => {
		const email = `throttle-e2e-${Date.now()}@clinic.test`;
		await createUser({ email, name: 'Throttle Probe', roles: ['scorer'], password: 'the-right-password-2' }, null);
		const page = await (await browser.newContext()).newPage();
		for (let i = 0; i < 5; i++) {
			await signIn(page, email, `wrong-password-${i}`);
			expect(await page.getByTestId('signin-error').innerText()).toContain('do not match');
		}
		await signIn(page, email, 'the-right-password-2');
		expect(await page.getByTestId('signin-error').innerText()).toContain('Too many failed sign-ins');
	}, 60_000);
});

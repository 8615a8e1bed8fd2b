/**
 * What a user types or picks before the page's script has run must survive it. On a slow link or a
 * busy machine a form is usable as soon as its HTML arrives, and a password manager fills it at
 * once; when the script then hydrates the page, a field written `value={…}` was set back to its
 * server-rendered value (empty), so the e-mail on the sign-in page vanished and the browser's
 * "required" check silently stopped the submit: no request, no message (the sign-in "stall" the
 * end-to-end runs met now and then). A <select> bound to a defined value is likewise set back when it
 * mounts (the catalog's filters and sort). Here the page's scripts are held back until the fields are
 * filled, then let through, and every filled value must still be there (and, on the catalog list, applied).
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser, Page, Route } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn } from '../helpers/http';
import { createViaForm, uniqueCode } from '../helpers/workflow';
import { closeDb, selectOne } from '../../src/lib/server/db';

let browser: Browser;
beforeAll(async () => {
	browser = await launch();
});
afterAll(async () => {
	await browser?.close();
	await closeDb();
});

/** Open `path` with the app's scripts held back (scripts only: a held stylesheet would hold the document too); the returned function lets them through and waits for hydration. */
async function openUnhydrated(page: Page, path: string): Promise<() => Promise<void>> {
	const held: Route[] = [];
	let open = false;
	await page.route(/\/_app\/immutable\/.*\.js(\?|$)/, (route) => {
		if (open) return route.continue();
		held.push(route);
	});
	await page.goto(`${BASE_URL}${path}`, { waitUntil: 'domcontentloaded' });
	expect(await page.evaluate(() => document.documentElement.dataset.hydrated ?? null), 'scripts held back: not hydrated yet').toBeNull();
	return async () => {
		open = true;
		for (const r of held.splice(0)) await r.continue();
		await page.waitForFunction(() => document.documentElement.dataset.hydrated === 'true', undefined, { timeout: 15_000 });
	};
}

describe('fields filled before the page is hydrated keep their values', () => {
	it('sign-in: the e-mail and password typed early are kept, and the sign-in goes through', async () => {
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		const release = await openUnhydrated(page, '/signin');
		await page.fill('#email', ACCOUNTS.scorer);
		await page.fill('#password', DEMO_PASSWORD);
		await release();
		expect(await page.inputValue('#email')).toBe(ACCOUNTS.scorer);
		expect(await page.inputValue('#password')).toBe(DEMO_PASSWORD);
		await page.click('button[type=submit]');
		await page.waitForURL((u) => !u.pathname.startsWith('/signin'), { timeout: 15_000 });
		expect(new URL(page.url()).pathname).toBe('/');
		await ctx.close();
	});

	it('new protocol (lead): a code, a birth date and a choice made early are kept', async () => {
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
		const release = await openUnhydrated(page, '/protocols/new');
		await page.fill('#code', 'EARLY-0001');
		await page.fill('#birthDate', '1980-04-02');
		await page.selectOption('#sex', 'F');
		await page.fill('#educationYears', '13');
		await page.fill('#testDate', '2024-11-05');
		await release();
		expect(await page.inputValue('#code')).toBe('EARLY-0001');
		expect(await page.inputValue('#birthDate')).toBe('1980-04-02');
		expect(await page.inputValue('#sex')).toBe('F');
		expect(await page.inputValue('#educationYears')).toBe('13');
		expect(await page.inputValue('#testDate')).toBe('2024-11-05');
		await ctx.close();
	});

	it('protocols list: a search typed early is kept', async () => {
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
		const release = await openUnhydrated(page, '/protocols');
		await page.fill('#q', 'HV-01');
		await release();
		expect(await page.inputValue('#q')).toBe('HV-01');
		await ctx.close();
	});

	it('entry (scorer): a raw score typed early is kept and saved', async () => {
		const lead = await signedIn('lead');
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, code: uniqueCode('EARLY') });
		const first = await selectOne<{ code: string }>(
			'SELECT t.code FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = :id ORDER BY pt.position LIMIT 1',
			{ id }
		);
		const field = `#f-${first!.code}-raw`;
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.scorer, DEMO_PASSWORD);
		const release = await openUnhydrated(page, `/protocols/${id}/entry`);
		await page.fill(field, '17');
		await release();
		expect(await page.inputValue(field)).toBe('17');
		// and it is saved like any other change: after a reload the server gives it back
		await page.getByTestId('save-state').filter({ hasText: /saved/i }).waitFor({ timeout: 15_000 });
		await page.reload();
		expect(await page.inputValue(field)).toBe('17');
		await ctx.close();
	});

	it('audit filters (lead): a date and a choice made early are kept', async () => {
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
		const release = await openUnhydrated(page, '/audit');
		await page.fill('#f-from', '2025-01-01');
		const kind = await page.locator('#f-kind option').nth(1).getAttribute('value');
		expect(kind, 'the kind filter offers at least one kind').toBeTruthy();
		await page.selectOption('#f-kind', kind!);
		await page.selectOption('#f-field', 'raw');
		await release();
		expect(await page.inputValue('#f-from')).toBe('2025-01-01');
		expect(await page.inputValue('#f-kind')).toBe(kind);
		expect(await page.inputValue('#f-field')).toBe('raw');
		await ctx.close();
	});

	it('norm set (lead): a test picked early in the group filter is kept and applied', async () => {
		// a norm set with groups of at least two tests, one of them, and how many groups it has there
		const set = await selectOne<{ id: number; code: string }>(
			`SELECT norm_set_id AS id, MIN(test_code) AS code FROM norm_groups WHERE subject = 'test'
			 GROUP BY norm_set_id HAVING COUNT(DISTINCT test_code) >= 2 ORDER BY norm_set_id LIMIT 1`
		);
		expect(set, 'a norm set with groups of two tests').toBeTruthy();
		const { n } = (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM norm_groups WHERE norm_set_id = :id AND test_code = :code', set!))!;
		const { total } = (await selectOne<{ total: number }>('SELECT COUNT(*) AS total FROM norm_groups WHERE norm_set_id = :id', set!))!;
		expect(Number(n)).toBeLessThan(Number(total)); // so the filter visibly applies
		const ctx = await browser.newContext();
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
		const release = await openUnhydrated(page, `/catalog/norm-sets/${set!.id}`);
		await page.selectOption('#f-test', set!.code);
		await release();
		expect(await page.inputValue('#f-test')).toBe(set!.code);
		const groups = page.getByTestId('groups-table').getByTestId('group-words');
		await page
			.waitForFunction((want) => document.querySelectorAll('[data-testid="group-words"]').length === want, Number(n), { timeout: 5_000 })
			.catch(() => undefined);
		expect(await groups.count()).toBe(Number(n));
		await ctx.close();
	});

	it('catalog tests (lead, phone width): a domain, a direction and a sort chosen early are kept and applied', async () => {
		const ctx = await browser.newContext({ viewport: { width: 390, height: 844 } }); // the sort select shows below 768 px
		const page = await ctx.newPage();
		await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
		const release = await openUnhydrated(page, '/catalog/tests');
		// the demo catalog's processing-speed tests where lower is better: Speeded Figure Match (speeded-match),
		// then Dot Chase (dot-chase) in catalog order; by code, dot-chase comes first
		await page.selectOption('#f-domain', 'processing-speed');
		await page.selectOption('#f-dir', 'lower_better');
		await page.selectOption('#f-sort', 'code');
		await release();
		expect(await page.inputValue('#f-domain')).toBe('processing-speed');
		expect(await page.inputValue('#f-dir')).toBe('lower_better');
		expect(await page.inputValue('#f-sort')).toBe('code');
		const table = page.getByTestId('tests-table');
		// the list redraws once hydration has taken the choices up: wait (5 s at most) for the direction filter to show
		await page
			.waitForFunction(
				() =>
					Array.from(document.querySelectorAll('[data-testid="tests-table"] td[data-label="Direction"]')).every((td) =>
						/lower better/.test(td.textContent ?? '')
					),
				undefined,
				{ timeout: 5_000 }
			)
			.catch(() => undefined); // the assertions below say what is wrong
		const codes = (await table.locator('tbody tr td:first-child').allTextContents()).map((c) => c.trim());
		expect(codes).toContain('dot-chase');
		expect(codes).toContain('speeded-match');
		expect(codes.indexOf('dot-chase')).toBeLessThan(codes.indexOf('speeded-match'));
		for (let i = 1; i < codes.length; i++)
			expect(codes[i - 1].localeCompare(codes[i], 'en', { numeric: true }), `${codes[i - 1]} before ${codes[i]}`).toBeLessThanOrEqual(0);
		// only the chosen domain and direction are listed (the filters applied, not only shown)
		const domains = await table.locator('tbody tr td[data-label="Domain"]').allTextContents();
		const directions = await table.locator('tbody tr td[data-label="Direction"]').allTextContents();
		expect(domains.map((d) => d.trim())).toEqual(codes.map(() => 'Processing speed'));
		expect(directions.length).toBe(codes.length);
		for (const d of directions) expect(d).toContain('lower better');
		await ctx.close();
	});
});

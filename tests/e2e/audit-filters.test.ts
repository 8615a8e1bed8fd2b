/**
 * The Audit screen in Chromium: its filters live in the address (issue 16). Choosing a filter puts
 * it in the URL and redraws the tables from the server; a reload or the same link opened in a new
 * page shows the same choice; Back returns to the earlier one; a bad value in a link is named beside
 * its filter. Screenshots at 1440 and 390 px go to .data/screens/ for a person to look at.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD } from '../helpers/http';

let browser: Browser;
const SCREENS = '.data/screens';

beforeAll(async () => {
	mkdirSync(SCREENS, { recursive: true });
	browser = await launch();
});
afterAll(async () => {
	await browser?.close();
});

async function lead(width: number): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width, height: 900 } });
	const page = await ctx.newPage();
	await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
	return page;
}

describe('Audit filters in the address', () => {
	it('a chosen kind goes into the URL, survives a reload and a shared link, and Back undoes it', async () => {
		const page = await lead(1440);
		await page.goto(`${BASE_URL}/audit`);
		await expect(page.getByTestId('table-scorers').isVisible()).resolves.toBe(true);
		await page.screenshot({ path: `${SCREENS}/audit-1440.png`, fullPage: true });

		await page.locator('#f-kind').selectOption('transposition');
		await page.waitForURL(/[?&]kind=transposition/);
		await expect(page.locator('#h-scorers').textContent()).resolves.toContain('Digits swapped');
		await expect(page.locator('[data-testid="csv-scorers"]').getAttribute('href')).resolves.toContain('kind=transposition');

		await page.reload();
		await expect(page.locator('#f-kind').inputValue()).resolves.toBe('transposition');
		await expect(page.locator('#h-scorers').textContent()).resolves.toContain('Digits swapped');

		const shared = await lead(1440);
		await shared.goto(page.url());
		await expect(shared.locator('#f-kind').inputValue()).resolves.toBe('transposition');
		await shared.context().close();

		await page.goBack();
		await page.waitForURL((u) => !u.search.includes('kind='));
		// the address changes at once; the form follows when the server's answer is in
		await page.waitForFunction(() => (document.querySelector('#f-kind') as HTMLSelectElement).value === '', undefined, { timeout: 15_000 });
		await expect(page.locator('#h-scorers').textContent()).resolves.not.toContain('Digits swapped');
		await page.context().close();
	}, 120_000);

	it('a bad value in a link is named beside its filter; the phone width shows the same screen', async () => {
		const page = await lead(390);
		await page.goto(`${BASE_URL}/audit?from=2023-02-30`);
		await expect(page.locator('#e-from').textContent()).resolves.toContain('2023-02-30 does not exist');
		await expect(page.getByTestId('filter-errors').textContent()).resolves.toContain('From');
		await page.goto(`${BASE_URL}/audit`, { waitUntil: 'networkidle' });
		await expect(page.getByTestId('table-scorers').isVisible()).resolves.toBe(true);
		// the charts measure their box and redraw at its width after the first paint (as widths.test.ts
		// settles before it judges): wait up to 15 s for the page to stop scrolling sideways
		const fits = await page
			.waitForFunction(() => document.documentElement.scrollWidth <= innerWidth, undefined, { timeout: 15_000 })
			.then(
				() => true,
				() => false
			);
		expect(fits, `the page is ${await page.evaluate(() => document.documentElement.scrollWidth)} px wide at 390 px`).toBe(true);
		await page.screenshot({ path: `${SCREENS}/audit-390.png`, fullPage: true });
		await page.context().close();
	}, 120_000);
});

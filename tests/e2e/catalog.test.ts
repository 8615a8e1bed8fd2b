/** In Chromium: upload a norm CSV with a bad row, see it named, fix it, import it. */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { closeDb, selectOne } from '../../src/lib/server/db';

let browser: Browser;
let page: Page;
beforeAll(async () => {
	browser = await launch();
	page = await browser.newPage();
	await signIn(page, 'lee.lead@demo.crosstally.test', 'crosstally-demo');
});
afterAll(async () => {
	await browser?.close();
	await closeDb();
});

const H = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,mean,sd,n';
const file = (body: string) => ({ name: 'norms.csv', mimeType: 'text/csv', buffer: Buffer.from(body) });

describe('CSV import screen', () => {
	it('names a bad row, then imports the corrected file', async () => {
		const code = `e2e-${Date.now().toString(36)}`;
		await page.goto(`${BASE_URL}/catalog/import`);
		await page.fill('#ns-code', code);
		await page.fill('#ns-name', 'E2E Norms');
		await page.fill('#ns-source', 'Invented for the end-to-end test');
		const bad = `${H}\nword-recall,a18,216,359,,,,25.8,4.0,120\nword-recall,a30,360,479,,,,24.5,0,110\nword-recall,a40,480,599,,,,22.1,4.6,100\n`;
		await page.setInputFiles('[data-testid=csv-file]', file(bad));
		const errors = page.locator('[data-testid=row-errors] tbody tr');
		await errors.first().waitFor();
		expect(await errors.count()).toBe(1);
		expect(await errors.first().innerText()).toMatch(/^3\s+sd\s+sd: 0 — SD must be above 0/);
		expect(await page.locator('[data-testid=confirm-import]').isDisabled()).toBe(true);
		expect(await page.locator('[data-testid=sample-rows] tbody tr').count()).toBe(3);

		await page.setInputFiles('[data-testid=csv-file]', file(bad.replace('24.5,0,110', '24.5,4.2,110')));
		await page.getByText('Every row reads well').waitFor();
		expect(await page.locator('[data-testid=row-errors]').count()).toBe(0);
		await page.click('[data-testid=confirm-import]');
		await page.locator('[data-testid=import-done]').waitFor();
		expect(await page.locator('[data-testid=import-done]').innerText()).toMatch(/Imported 3 rows/);
		const set = await selectOne<{ id: number; n: number }>(
			'SELECT s.id, COUNT(g.id) AS n FROM norm_sets s JOIN norm_groups g ON g.norm_set_id = s.id WHERE s.code = :code GROUP BY s.id',
			{ code }
		);
		expect(Number(set!.n)).toBe(3);
	});
	it('keeps the page responsive with a progress bar on a 100,000-row file', async () => {
		await page.goto(`${BASE_URL}/catalog/import`);
		const rows: string[] = [H];
		for (let i = 0; i < 100_000; i++) {
			const k = i % 246;
			const band = Math.floor(i / 246);
			rows.push(
				`${k % 2 ? 'word-recall' : 'speeded-match'},g${i},${band * 3},${band * 3 + 2},${['', 'F', 'M'][Math.floor(k / 2) % 3]},${Math.floor(k / 6)},${Math.floor(k / 6)},24.5,4.2,100`
			);
		}
		const t0 = Date.now();
		await page.setInputFiles('[data-testid=csv-file]', { name: 'big.csv', mimeType: 'text/csv', buffer: Buffer.from(rows.join('\n')) });
		// The main thread answers while the worker reads.
		const ping = await page.evaluate(
			() =>
				new Promise<number>((r) => {
					const s = performance.now();
					setTimeout(() => r(performance.now() - s), 0);
				})
		);
		expect(ping).toBeLessThan(200);
		await page.getByText('Every row reads well').waitFor({ timeout: 30_000 });
		const ms = Date.now() - t0;
		console.log(`[measure] 100,000-row preview in the browser: ${ms} ms`);
		expect(await page.locator('[data-testid=preview-summary]').innerText()).toMatch(/100,000\s*rows/);
	});
});

/**
 * In Chromium: norms as the manuals give them (issue 14).
 * - The catalog's table grid: a table pasted from a spreadsheet, its gap named by row as you type,
 *   fixed, saved; read back from the database.
 * Screenshots go to $SHOTS_DIR (default .data/shots) for a look at each screen.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { closeDb, selectOne } from '../../src/lib/server/db';

const SHOTS = process.env.SHOTS_DIR ?? '.data/shots';
let browser: Browser;
let page: Page;
beforeAll(async () => {
	mkdirSync(SHOTS, { recursive: true });
	browser = await launch();
	page = await browser.newPage({ viewport: { width: 1400, height: 1000 } });
	await signIn(page, 'lee.lead@demo.crosstally.test', 'crosstally-demo');
});
afterAll(async () => {
	await browser?.close();
	await closeDb();
});

describe('the catalog table grid', () => {
	it('takes a pasted table, names its gap by row as you type, and saves it once covered', async () => {
		const set = await selectOne<{ id: number }>("SELECT id FROM norm_sets WHERE code = 'tidewater-2025'");
		await page.goto(`${BASE_URL}/catalog/norm-sets/${set!.id}`);
		const editor = page.getByTestId('norm-editor');
		await editor.getByLabel('Test or composite').selectOption('tile-build');
		const group = `x${Date.now().toString(36).slice(-5)}`;
		await editor.getByLabel('Group code').fill(group);
		// a band no other tile-build group covers (the demo's bands run 216–1079 months)
		await editor.getByLabel('Ages from (months)').fill('1080');
		await editor.getByLabel('to (months, incl.)').fill('1199');
		await editor.getByLabel('Conversion table').check();
		// as copied from a spreadsheet: a range in one cell, then the scaled score; raw 5 is missing
		const pasted = ['Raw\tScaled', '0–4\t3', '6\t4', '7\t5', '8–10\t6', '11–14\t8', '15–17\t10', '18–20\t12'].join('\n');
		await editor.locator('summary', { hasText: 'Paste from a spreadsheet' }).click();
		await editor.getByLabel('Rows pasted from a spreadsheet').fill(pasted);
		await editor.getByRole('button', { name: 'Fill the grid' }).click();
		const problems = editor.getByTestId('table-problems');
		await problems.waitFor();
		// row 1 is 0–4, row 2 starts at 6: nothing covers raw 5 (worked by hand from the rows above)
		expect(await problems.innerText()).toBe('Row 2: gap — nothing covers raw 5–5 between rows 1 and 2.');
		expect(await editor.getByLabel('Row 2 raw from').getAttribute('aria-invalid')).toBe('true');
		expect(await editor.getByRole('button', { name: 'Save this group' }).isDisabled()).toBe(true);
		await page.screenshot({ path: `${SHOTS}/norm-editor-gap.png`, fullPage: true });
		await editor.getByLabel('Row 2 raw from').fill('5');
		await editor.getByTestId('table-ok').waitFor();
		expect(await editor.getByTestId('table-ok').innerText()).toBe('Covers 0–20 once: 7 rows.');
		await editor.getByRole('button', { name: 'Save this group' }).click();
		// 1080 months = 90 years 0 months, 1199 = 99 × 12 + 11 (the group by what it covers, not its code)
		await editor.getByText('Saved the group for ages 90;0–99;11 of tile-build.').waitFor();
		const saved = await selectOne<{ n: number; form: string; scale: string }>(
			`SELECT g.form, g.scale, COUNT(r.id) AS n FROM norm_groups g JOIN norm_table_rows r ON r.norm_group_id = g.id
			  WHERE g.norm_set_id = :s AND g.test_code = 'tile-build' AND g.group_code = :group GROUP BY g.id`,
			{ s: set!.id, group }
		);
		expect({ ...saved, n: Number(saved!.n) }).toEqual({ form: 'table', scale: 'scaled', n: 7 });
		await page.screenshot({ path: `${SHOTS}/norm-set.png`, fullPage: true });
	});

	it("shows the battery's composites and lets a lead edit them", async () => {
		const b = await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'tidewater-profile'");
		await page.goto(`${BASE_URL}/catalog/batteries/${b!.id}`);
		const rows = page.getByTestId('battery-composites').locator('tbody tr');
		expect(await rows.count()).toBe(2);
		expect(await rows.first().innerText()).toMatch(
			/^Memory Index memory-index\s+Harbour Word Recall \+ Tile Build \(scaled scores\)\s+Sum, Standard score, Percentile\s+0\.9$/
		);
		const editor = page.getByTestId('composites-editor');
		await editor.getByLabel('Reliability').first().fill('0.91');
		await editor.getByRole('button', { name: 'Save composites' }).click();
		await editor.getByText('Composites saved.').waitFor();
		const r = await selectOne<{ reliability: number }>("SELECT reliability FROM composites WHERE code = 'memory-index'");
		expect(Number(r!.reliability)).toBe(0.91);
		await page.screenshot({ path: `${SHOTS}/battery.png`, fullPage: true });
		// back to the demo's 0.90 (the summary's interval below is worked with it)
		await editor.getByLabel('Reliability').first().fill('0.9');
		await editor.getByRole('button', { name: 'Save composites' }).click();
		await page.waitForFunction(() => document.querySelector('[data-testid=composites-editor] [role=status]')?.textContent === 'Composites saved.');
	});
});

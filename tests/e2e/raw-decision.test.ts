/**
 * The raw-42 scenario of issue 13, end to end in Chromium: the second scorer typed raw 42 for 24 on
 * Word Harvest but looked up the derived scores for 24. The reviewer sees one raw card and three
 * derived cards waiting on it; settling the raw score as 24 closes the derived cards by themselves;
 * the summary shows raw 24's scores; the audit charges the second scorer one raw error only.
 *
 * Word Harvest (invented demo norms), higher is better; examinee 38 years old with 12 years of
 * education → group ages 30;0–39;11, up to 12 years of education: mean 19.5, SD 4.6. By hand:
 *   raw 24: z = 4.5/4.6 = 0.978 → 0.98; T = 59.78 → 60; percentile 100·Φ(0.978) ≈ 83.6 → 84
 *   raw 42: z = 22.5/4.6 = 4.891 → 4.89; T = 98.9 → 80 (the T bound); percentile ≈ 99.99995 → 99 (clamp)
 * Screenshots of Review before and after the raw decision: .data/screens/review-raw-{before,after}.png
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, type Scores } from '../helpers/workflow';
import { seriousViolations, describeViolations } from '../helpers/axe';
import { closeDb, select, selectOne } from '../../src/lib/server/db';

let browser: Browser;
let id: number;
const SCREENS = `${process.env.CROSSTALLY_DATA_DIR ?? '.data/test'}/../screens`;

beforeAll(async () => {
	browser = await launch();
	mkdirSync(SCREENS, { recursive: true });
	const [lead, s1, s2] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2')]);
	id = await createViaForm(lead, {
		first: ACCOUNTS.scorer,
		second: ACCOUNTS.scorer2,
		reviewer: ACCOUNTS.reviewer,
		educationYears: 12,
		code: `RAW42-${Date.now().toString(36).toUpperCase()}`
	});
	// both passes right everywhere else (setup only); Word Harvest as in the scenario
	const first = await correctScores(id, {});
	first['word-harvest'] = { raw: '24', z: '0.98', t: '60', percentile: '84' };
	const second: Scores = JSON.parse(JSON.stringify(first));
	second['word-harvest'].raw = '42';
	expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
	expect((await saveAndSubmit(s2, id, second)).status).toBe(200);
}, 90_000);

afterAll(async () => {
	await browser?.close();
	await closeDb();
});

async function person(email: string): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width: 1400, height: 1000 }, bypassCSP: true });
	const page = await ctx.newPage();
	await signIn(page, email, DEMO_PASSWORD);
	return page;
}

describe('a raw decision settles its derived scores (raw 42 for 24)', () => {
	it('one raw card, derived cards waiting on it; settled as 24 they close themselves; summary and audit right', async () => {
		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		const cards = page.getByTestId('discrepancy');
		await expect.poll(() => cards.count()).toBe(4);
		const raw = page.locator('[data-testid="discrepancy"][data-field="raw"]');
		expect(await raw.count()).toBe(1);
		expect(await raw.innerText()).toContain('Digits swapped');
		// raw 24 against raw 42: the card says the passes disagree, not that both scorers erred
		expect(await raw.getByTestId('pass-words').innerText()).toBe('the passes disagree: one or both may be wrong');
		expect(await raw.innerText()).not.toContain('both passes');
		expect(await raw.getByTestId('slip').innerText()).toContain('fit the first pass’s raw score 24 — the raw 42 is likely a typing slip');
		const waiting = page.locator('[data-testid="discrepancy"][data-waiting="true"]');
		expect(await waiting.count()).toBe(3);
		for (const f of ['z', 't', 'percentile']) {
			const card = page.locator(`[data-testid="discrepancy"][data-field="${f}"]`);
			expect(await card.getAttribute('data-waiting')).toBe('true');
			expect(await card.getByTestId('fits').innerText()).toContain('fits the first pass’s raw score 24');
			expect(await card.locator('input[type="radio"][value="second"]').isDisabled()).toBe(true);
		}
		// each kind's long explanation once: the three derived cards share one kind
		expect(await page.getByTestId('kind-explanation').count()).toBe(2);
		const violations = await seriousViolations(page);
		expect(violations, describeViolations(violations)).toEqual([]);
		await page.screenshot({ path: `${SCREENS}/review-raw-before.png`, fullPage: true });

		// "next open" (keyboard N) goes to the raw card, the only one not waiting
		await page.locator('h2#list-title').click();
		await page.keyboard.press('n');
		await expect.poll(() => page.evaluate(() => document.activeElement?.closest('[data-testid="discrepancy"]')?.getAttribute('data-field'))).toBe('raw');
		// keep the first pass's 24
		await raw.locator('input[type="radio"][value="first"]').check();
		await raw.getByTestId('resolve').click();
		await expect.poll(() => page.locator('[data-testid="discrepancy"][data-open="true"]').count(), { timeout: 15_000 }).toBe(0);
		for (const f of ['z', 't', 'percentile']) {
			const card = page.locator(`[data-testid="discrepancy"][data-field="${f}"]`);
			expect(await card.getByTestId('kept').innerText()).toContain('settled by the raw decision');
			expect(await card.getByTestId('settled').innerText()).toContain('the raw score 24 was kept');
		}
		expect(await page.locator('[data-testid="discrepancy"][data-field="z"]').getByTestId('kept').innerText()).toContain('kept 0.98');
		// resolved cards are collapsed: no choice buttons shown
		expect(await page.locator('[data-testid="discrepancy"][data-field="t"] input[type="radio"]').count()).toBe(0);
		await page.screenshot({ path: `${SCREENS}/review-raw-after.png`, fullPage: true });

		// sign off; the summary holds raw 24 with its own derived scores
		await page.getByTestId('sign-off').click();
		await page.getByText('Verified and locked.').waitFor();
		await page.goto(`${BASE_URL}/protocols/${id}/summary`);
		const row = page.locator('[data-testid="summary-table"] tr[data-test="word-harvest"]');
		expect(await row.locator('td[data-field="raw"]').innerText()).toBe('24');
		expect(await row.locator('td[data-field="z"]').innerText()).toBe('0.98');
		expect(await row.locator('td[data-field="t"]').innerText()).toBe('60');
		expect((await row.locator('td[data-field="percentile"]').innerText()).trim()).toBe('84');
		expect(await row.innerText()).toContain('ages 30;0–39;11, up to 12 years of education');
		expect(await row.innerText()).not.toContain('a30-e0');

		// the audit: one error, charged to the second scorer, on the raw score
		const sue = (await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :e', { e: ACCOUNTS.scorer2 }))!.id;
		const events = await select<{ scorer_id: number; field: string; kind: string }>('SELECT scorer_id, field, kind FROM error_events WHERE protocol_id = :id', {
			id
		});
		expect(events).toEqual([{ scorer_id: sue, field: 'raw', kind: 'transposition' }]);
		await page.context().close();
	}, 120_000);
});

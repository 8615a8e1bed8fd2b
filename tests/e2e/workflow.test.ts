/**
 * End to end in Chromium with three people: the first scorer enters by keyboard only, the second
 * enters blind with a transposition and a sign error, the reviewer resolves both against the scan
 * and signs off, and the summary shows the corrected values. Accessibility checks (axe-core) on
 * Entry, Review and Summary.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn } from '../helpers/http';
import { createViaForm, correctScores, type Scores } from '../helpers/workflow';
import { seriousViolations, describeViolations } from '../helpers/axe';
import { closeDb, selectOne } from '../../src/lib/server/db';
import { protocolTests } from '../../src/lib/server/catalog';

let browser: Browser;
let id: number;
let correct: Scores;
let order: { code: string; field: string }[];

// A tiny PNG "scan" (1×1 px) so the review screen shows an image beside the list.
const PNG = Buffer.from('iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAYAAAAfFcSJAAAADUlEQVR42mP8z/C/HgAGgwJ/lK3Q6wAAAABJRU5ErkJggg==', 'base64');

beforeAll(async () => {
	browser = await launch();
	const lead = await signedIn('lead');
	id = await createViaForm(lead, {
		first: ACCOUNTS.scorer,
		second: ACCOUNTS.scorer2,
		reviewer: ACCOUNTS.reviewer,
		code: `E2E-${Date.now().toString(36).toUpperCase()}`
	});
	correct = await correctScores(id, { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 });
	order = (await protocolTests(id)).flatMap((t) => ['raw', ...t.reported].map((field) => ({ code: t.code, field })));
	const fd = new FormData();
	fd.append('file', new File([PNG], 'record-form.png'));
	const up = await lead.request(`/protocols/${id}?/upload`, { method: 'POST', body: fd, headers: { 'x-sveltekit-action': 'true' } });
	expect(up.status).toBe(200);
}, 60_000);

afterAll(async () => {
	await browser?.close();
	await closeDb();
});

async function person(email: string): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width: 1400, height: 900 }, bypassCSP: true });
	const page = await ctx.newPage();
	await signIn(page, email, DEMO_PASSWORD);
	return page;
}

/** Type every field in administration order with the keyboard alone: value, Enter, value, Enter … */
async function typeAll(page: Page, scores: Scores) {
	for (const { code, field } of order) {
		const focused = await page.evaluate(() => document.activeElement?.id);
		expect(focused).toBe(`f-${code}-${field}`);
		await page.keyboard.type(scores[code][field as keyof Scores[string]] ?? '');
		await page.keyboard.press('Enter');
	}
	expect(await page.evaluate(() => document.activeElement?.id)).toBe('submit-pass');
}

describe('double entry, end to end', () => {
	it('first scorer: keyboard only from the first field to submit', async () => {
		const page = await person(ACCOUNTS.scorer);
		await page.goto(`${BASE_URL}/`);
		await page.getByTestId('worklist').locator('tr', { hasText: 'Enter first pass' }).first().waitFor();
		await page.goto(`${BASE_URL}/protocols/${id}/entry`);
		await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
		// a live check warns (does not block) and never shows the expected score
		await page.keyboard.type('999');
		await expect.poll(() => page.getByTestId('field-warning').count()).toBe(1);
		expect(await page.getByTestId('field-warning').innerText()).toContain('Raw scores on this test run from 0 to 300');
		await page.keyboard.press('Control+A');
		await page.keyboard.press('Backspace');
		await typeAll(page, correct);
		const violations = await seriousViolations(page);
		expect(violations, describeViolations(violations)).toEqual([]);
		await page.keyboard.press('Enter'); // the submit button opens the confirmation
		await page.getByRole('dialog').waitFor();
		await page.keyboard.press('Enter'); // focus starts on "Submit and lock"
		await page.waitForURL(new RegExp(`/protocols/${id}\\?submitted=first`));
		// a confirmation says what was submitted and what comes next (every field was typed: order.length)
		const banner = page.getByTestId('submitted-banner');
		await banner.waitFor();
		expect(await banner.innerText()).toContain(`First pass submitted and locked (${order.length} fields entered).`);
		expect(await banner.innerText()).toContain('enters the second pass blind, without seeing yours');
		const p = await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id });
		expect(p!.status).toBe('awaiting_second');
		await page.context().close();
	}, 120_000);

	it('second scorer: blind, with a transposition and a sign not reversed; the draft survives a reload', async () => {
		const page = await person(ACCOUNTS.scorer2);
		await page.goto(`${BASE_URL}/protocols/${id}/entry`);
		await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
		// nothing of the first pass is on the page
		const html = await page.content();
		expect(html).not.toContain(`value="${correct['word-recall'].standard}"`);
		expect(await page.locator('input[id^="f-"]').evaluateAll((els) => els.filter((e) => (e as HTMLInputElement).value !== '').length)).toBe(0);
		const mine: Scores = JSON.parse(JSON.stringify(correct));
		mine['word-recall'].standard = correct['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2'); // 116 → 161
		mine['speeded-match'].z = `-${correct['speeded-match'].z}`; // "-1.00"
		await typeAll(page, mine);
		await expect.poll(() => page.getByTestId('save-state').innerText(), { timeout: 10_000 }).toContain('Draft saved');
		await page.reload();
		await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
		expect(await page.inputValue('#f-word-recall-standard')).toBe(mine['word-recall'].standard);
		await page.click('#submit-pass');
		await page.getByTestId('confirm-submit').click();
		await page.waitForURL(new RegExp(`/protocols/${id}\\?submitted=second`));
		// two discrepancies: the transposition and the sign (resolved below)
		const banner = page.getByTestId('submitted-banner');
		await banner.waitFor();
		expect(await banner.innerText()).toContain(`Second pass submitted and locked (${order.length} fields entered).`);
		expect(await banner.innerText()).toContain('Both passes are in and were compared: 2 discrepancies were found.');
		await page.context().close();
	}, 120_000);

	it('reviewer: resolves both against the scan, signs off; the summary shows the corrected values', async () => {
		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		const items = page.getByTestId('discrepancy');
		await expect.poll(() => items.count()).toBe(2);
		expect(await page.getByTestId('scan').getAttribute('src')).toMatch(new RegExp(`/protocols/${id}/attachments/\\d+`));
		// the header names who entered each pass (the demo accounts of db/seeds/accounts.ts)
		expect(await page.getByText('first pass Sam Okafor, second pass Rae Lindqvist').count()).toBe(1);
		const flip = page.locator('[data-testid="discrepancy"][data-kind="sign_flip"]');
		const swap = page.locator('[data-testid="discrepancy"][data-kind="transposition"]');
		expect(await flip.innerText()).toContain('Direction wrong way round');
		expect(await swap.innerText()).toContain('Digits swapped');
		// the digits that moved are marked
		expect(await swap.locator('[data-side="second"] mark').count()).toBeGreaterThan(0);
		const violations = await seriousViolations(page);
		expect(violations, describeViolations(violations)).toEqual([]);
		for (const item of [flip, swap]) {
			await item.getByLabel('Recomputed').check();
			await item.getByTestId('resolve').click();
			await expect.poll(() => item.innerText(), { timeout: 15_000 }).toContain('kept');
		}
		await page.getByTestId('sign-off').click();
		await expect.poll(() => page.getByRole('status').allInnerTexts()).toContain('Verified and locked.');
		await page.goto(`${BASE_URL}/protocols/${id}/summary`);
		const recall = page.locator('tr[data-test="word-recall"]');
		expect(await recall.locator('[data-field="standard"]').innerText()).toBe(correct['word-recall'].standard);
		expect(await page.locator('tr[data-test="speeded-match"] [data-field="z"]').innerText()).toBe(correct['speeded-match'].z);
		expect(await page.getByTestId('bell-curve').count()).toBe(1);
		expect(await page.getByTestId('cautions').innerText()).toContain('never replace');
		const sv = await seriousViolations(page);
		expect(sv, describeViolations(sv)).toEqual([]);
		await page.context().close();
	}, 120_000);
});

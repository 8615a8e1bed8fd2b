/**
 * Single-pass protocols are labelled as such in Chromium on every screen that shows them (worklist,
 * protocol, review, summary, its print layout), in the summary CSV, and on the lead's Audit screen for
 * risk-based verification. Screenshots go to .data/screens/ for a person to look at.
 */
import Papa from 'papaparse';
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn, type Client } from '../helpers/http';
import { correctScores, saveAndSubmit, uniqueCode, userId } from '../helpers/workflow';
import { makeBattery, makeScorer, seedCleanRecord, unseed } from '../helpers/verification';
import { closeDb, exec, select, selectOne } from '../../src/lib/server/db';
import { createProtocol } from '../../src/lib/server/protocols/service';

let browser: Browser;
let lead: Client;
let id: number;
let fake: number;
const SCREENS = '.data/screens';

beforeAll(async () => {
	mkdirSync(SCREENS, { recursive: true });
	browser = await launch();
	lead = await signedIn('lead');
	const b = await makeBattery();
	const r = await lead.action('/audit/verification?/policy', {
		batteryId: String(b.id),
		mode: 'sampled',
		minFields: '2000',
		windowDays: '180',
		thresholdPer100: '0.5',
		probabilityPercent: '25'
	});
	expect(r.body.type).toBe('success');
	const a = await makeScorer('Zora');
	const second = await makeScorer('Abel');
	fake = await seedCleanRecord(a.id, b.id, 400);
	const c = await signedIn(a.email);
	const leadId = await userId(ACCOUNTS.lead);
	// submit protocols until one is not drawn (p = 25%: 30 drawn in a row has probability 0.25^30 ≈ 1e-18)
	for (let i = 0; i < 30 && !id; i++) {
		const pid = await createProtocol(
			{
				examinee: { code: uniqueCode('SP'), birthDate: '1988-05-17', sex: 'F', educationYears: 14 },
				batteryId: b.id,
				testDate: '2026-11-20',
				firstScorerId: a.id,
				secondScorerId: second.id,
				reviewerId: await userId(ACCOUNTS.reviewer)
			},
			{ id: leadId, name: 'Lee Lead', roles: ['lead'] }
		);
		const s = await correctScores(pid, {});
		const res = await saveAndSubmit(c, pid, s);
		expect(res.status).toBe(200);
		if (res.body.status === 'in_review') id = pid;
	}
	expect(id).toBeTruthy();
	// The worklist shows the oldest 50 tasks of each kind, and the suite leaves many protocols in review
	// with this reviewer: date this one first so it is on the reviewer's first screen.
	await exec(`UPDATE protocols SET status_changed_at = '2001-01-01 00:00:00' WHERE id = :id`, { id });
}, 180_000);

afterAll(async () => {
	await unseed(fake);
	await browser?.close();
	await closeDb();
});

async function person(email: string): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width: 1400, height: 900 } });
	const page = await ctx.newPage();
	await signIn(page, email, DEMO_PASSWORD);
	return page;
}

describe('single pass, labelled everywhere', () => {
	it('worklist, protocol and review pages say "single pass"; the reviewer still signs off', async () => {
		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/`);
		const item = page.locator('[data-testid="worklist"] tr', { has: page.locator(`a[href="/protocols/${id}"]`) });
		await expect(item.getByTestId('single-pass').textContent()).resolves.toContain('single pass');
		await page.screenshot({ path: `${SCREENS}/t19-worklist.png`, fullPage: true });

		await page.goto(`${BASE_URL}/protocols/${id}`);
		await expect(page.getByTestId('single-pass').first().textContent()).resolves.toContain('single pass');
		await expect(page.getByTestId('single-pass-note').textContent()).resolves.toContain('raw scores not double-entered');
		await page.screenshot({ path: `${SCREENS}/t19-protocol.png`, fullPage: true });

		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		await expect(page.getByTestId('review-single-pass').textContent()).resolves.toContain('single pass');
		await page.screenshot({ path: `${SCREENS}/t19-review.png`, fullPage: true });
		// clean single pass: no findings, but it is not verified until the reviewer signs off
		expect((await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id }))?.status).toBe('in_review');
		const n = await select<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id });
		expect(Number(n[0].n)).toBe(0);
		await page.getByTestId('sign-off').click();
		await expect
			.poll(async () => (await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id }))?.status, { timeout: 15_000 })
			.toBe('verified');
		await page.context().close();
	}, 120_000);

	it('summary (screen and print) and its CSV say "single pass"', async () => {
		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/summary`);
		await expect(page.getByTestId('summary-single-pass').textContent()).resolves.toContain('single pass');
		await page.screenshot({ path: `${SCREENS}/t19-summary.png`, fullPage: true });
		await page.emulateMedia({ media: 'print' });
		expect(await page.getByTestId('summary-single-pass').isVisible()).toBe(true);
		await page.screenshot({ path: `${SCREENS}/t19-summary-print.png`, fullPage: true });
		const pdf = await page.pdf({ format: 'A4' });
		expect(pdf.length).toBeGreaterThan(1000);
		const csv = await (await page.request.get(`${BASE_URL}/protocols/${id}/summary.csv`)).text();
		// the entry column says how the scores were entered (later columns: kept-against notes, a composite's sum)
		// read back with papaparse (an independent reader; test names may hold commas and are quoted)
		const table = Papa.parse<string[]>(csv.replace(/^\ufeff/, ''), { skipEmptyLines: true, delimiter: ',' }).data;
		const col = table[0].indexOf('entry');
		expect(col).toBeGreaterThan(0);
		const rows = table.slice(1).filter((r) => !r[0].startsWith('#'));
		expect(rows.length).toBe(5);
		for (const r of rows) expect(r[col]).toBe('single pass');
		expect(csv).toContain('# Single pass: entered once');
		await page.context().close();
	}, 120_000);

	it('the lead sees the policy and each scorer on the Audit screen for risk-based verification', async () => {
		const page = await person(ACCOUNTS.lead);
		await page.goto(`${BASE_URL}/audit/verification`);
		await expect(page.getByTestId('scorer-risk').textContent()).resolves.toContain('sampled since');
		await page.screenshot({ path: `${SCREENS}/t19-audit-verification.png`, fullPage: true });
		await page.context().close();
	}, 60_000);
});

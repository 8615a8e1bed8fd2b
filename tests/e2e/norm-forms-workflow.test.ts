/**
 * End to end in Chromium: a protocol of the demo's Tidewater Cognitive Profile (conversion tables
 * per age band, two composites, a regression-normed test, a percentile-band error count) from
 * creation through two passes with a table look-up slip, a composite addition slip and a carried
 * composite, to a verified summary with the composites first.
 *
 * Every expected value is worked out by hand beside it. tile-build, memory-index and the regression
 * equation of category-naming are the invented worked examples of shared/spec/reconcile.md; the
 * other tables are the demo's invented ones (db/seeds/profile.ts). Percentiles of z come from the
 * standard normal table (any statistics text: Φ(0.40) = .6554, Φ(0.66) = .7454, Φ(0.67) = .7486,
 * Φ(0.80) = .7881, Φ(0.81) = .7910).
 *
 * The examinee: born 1990-03-10, tested 2025-11-20 → 35;8;10, age band a30 (360–479 months);
 * education 14 years. Regression norms take whole years: age 35.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD } from '../helpers/http';
import { closeDb, select, selectOne } from '../../src/lib/server/db';

const SHOTS = process.env.SHOTS_DIR ?? '.data/shots';
let browser: Browser;
let id: number;
const code = `TW-${Date.now().toString(36).toUpperCase()}`;

type Entry = Record<string, Record<string, string>>;
/**
 * The right look-ups for the raw scores of this examinee:
 * - word-recall raw 29, a30 mean 24.5 SD 4.2: z 1.07, standard 116, scaled 13, T 61, percentile 86 (reconcile.md).
 * - tile-build raw 16, a30 table: row 16 → scaled 14; percentile R(100·Φ(4/3)) = 91 (reconcile.md).
 * - knot-copy raw 25, a30 table (drawn from mean 22.6, SD 4.0: 10 + 3·2.4/4.0 = 11.8 → row 25 → 12);
 *   percentile R(100·Φ((12 − 10)/3 = 0.667)) ≈ R(74.75) = 75 (between Φ(0.66) and Φ(0.67)).
 * - cargo-code raw 53, a30 table (mean 49.6, SD 9.6: 10 + 3·3.4/9.6 = 11.06 → row 52–54 → 11).
 * - category-naming raw 48: predicted 30.0 − 0.15·35 + 1.2·14 = 41.55; z = (48 − 41.55)/8.0 = 0.80625:
 *   z 0.81, standard R(112.09) = 112, T R(58.06) = 58, percentile R(100·Φ(0.80625)) ≈ R(78.99) = 79.
 * - beacon-slips raw 3: the 2–3 row's band, 50-74.
 * - memory-index: sum 13 + 14 = 27, mean 20, SD 5.2: z 1.346, standard 120, percentile 91 (reconcile.md).
 * - visuomotor-index: sum 12 + 11 = 23, sum table row 22–23 → standard 106; percentile R(100·Φ(0.40)) = 66.
 */
const RIGHT: Entry = {
	'word-recall': { raw: '29', z: '1.07', standard: '116', scaled: '13', t: '61', percentile: '86' },
	'tile-build': { raw: '16', scaled: '14', percentile: '91' },
	'knot-copy': { raw: '25', scaled: '12', percentile: '75' },
	'cargo-code': { raw: '53', scaled: '11' },
	'category-naming': { raw: '48', z: '0.81', standard: '112', t: '58', percentile: '79' },
	'beacon-slips': { raw: '3', percentile: '50-74' },
	'memory-index': { sum: '27', standard: '120', percentile: '91' },
	'visuomotor-index': { sum: '23', standard: '106', percentile: '66' }
};
/**
 * First pass: reads tile-build's scaled score off the row below (17–18 → 15, an adjacent_row: no other
 * age band gives 15 for raw 16 — a18 as a30 gives 14, a40 13), and carries it into the Memory Index:
 * sum 13 + 15 = 28, standard R(100 + 15·(28 − 20)/5.2) = R(123.08) = 123, percentile R(100·Φ(1.538)) = R(93.80) = 94.
 * The band is written with an en dash, as printed.
 */
const FIRST: Entry = {
	...RIGHT,
	'tile-build': { raw: '16', scaled: '15', percentile: '91' },
	'beacon-slips': { raw: '3', percentile: '50–74' },
	'memory-index': { sum: '28', standard: '123', percentile: '94' }
};
/** Second pass: right parts, but adds 13 + 14 to 26 (a sum_error); the index looked up right for 27. */
const SECOND: Entry = { ...RIGHT, 'memory-index': { sum: '26', standard: '120', percentile: '91' } };

beforeAll(async () => {
	mkdirSync(SHOTS, { recursive: true });
	browser = await launch();
}, 60_000);
afterAll(async () => {
	await browser?.close();
	await closeDb();
});

async function person(email: string): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width: 1400, height: 900 } });
	const page = await ctx.newPage();
	await signIn(page, email, DEMO_PASSWORD);
	return page;
}
const userId = async (email: string) => String((await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email }))!.id);

async function enter(page: Page, values: Entry) {
	await page.goto(`${BASE_URL}/protocols/${id}/entry`);
	// hydrated: the page puts the focus on the first field once its script runs
	await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'), undefined, { timeout: 30_000 });
	for (const [c, fields] of Object.entries(values)) for (const [f, v] of Object.entries(fields)) await page.fill(`#f-${c}-${f}`, v);
	await page.getByTestId('save-state').getByText('Draft saved').waitFor();
}

async function submit(page: Page, which: 'first' | 'second') {
	await page.locator('#submit-pass').click();
	await page.getByRole('dialog').waitFor();
	await page
		.getByRole('dialog')
		.getByRole('button', { name: /Submit and lock/ })
		.click();
	await page.waitForURL(new RegExp(`/protocols/${id}\\?submitted=${which}`));
}

describe('the Tidewater profile, end to end', () => {
	it('a lead creates the protocol; it freezes the composites, their groups and the covariates', async () => {
		const page = await person(ACCOUNTS.lead);
		await page.goto(`${BASE_URL}/protocols/new`);
		await page.fill('#code', code);
		await page.fill('#birthDate', '1990-03-10');
		await page.selectOption('#sex', 'F');
		await page.fill('#educationYears', '14');
		await page.selectOption('#batteryId', { label: 'Tidewater Cognitive Profile (6 tests)' });
		await page.fill('#testDate', '2025-11-20');
		await page.selectOption('#firstScorerId', await userId(ACCOUNTS.scorer));
		await page.selectOption('#secondScorerId', await userId(ACCOUNTS.scorer2));
		await page.selectOption('#reviewerId', await userId(ACCOUNTS.reviewer));
		await page.getByRole('button', { name: 'Create protocol' }).click();
		await page.waitForURL(/\/protocols\/\d+\?created=1/);
		id = Number(page.url().match(/\/protocols\/(\d+)/)![1]);
		const p = await selectOne<{ age_text: string; covariates: string }>('SELECT age_text, covariates FROM protocols WHERE id = :id', { id });
		expect(p!.age_text).toBe('35;8;10');
		// age in whole years (the norm set's rule), education, sex (female = 1)
		expect(JSON.parse(p!.covariates)).toEqual({ age: 35, education: 14, sex: 1 });
		const frozen = await select<{ code: string; group_code: string }>(
			'SELECT pc.code, g.group_code FROM protocol_composites pc JOIN norm_groups g ON g.id = pc.norm_group_id WHERE pc.protocol_id = :id ORDER BY pc.position',
			{ id }
		);
		expect(frozen).toEqual([
			{ code: 'memory-index', group_code: 'a30' },
			{ code: 'visuomotor-index', group_code: 'all' }
		]);
		await page.context().close();
	}, 90_000);

	it('first scorer: composites come after their parts; a band is typed as printed; the sum of the own parts is not flagged', async () => {
		const page = await person(ACCOUNTS.scorer);
		await enter(page, FIRST);
		const fields = await page.locator('input[id^="f-"]').evaluateAll((els) => els.map((e) => e.id));
		// every test field first, then the composites' fields
		expect(fields.slice(-6)).toEqual([
			'f-memory-index-sum',
			'f-memory-index-standard',
			'f-memory-index-percentile',
			'f-visuomotor-index-sum',
			'f-visuomotor-index-standard',
			'f-visuomotor-index-percentile'
		]);
		expect(await page.getByTestId('field-warning').allInnerTexts()).toEqual([]);
		await page.screenshot({ path: `${SHOTS}/entry-composites.png`, fullPage: true });
		await submit(page, 'first');
		await page.context().close();
	}, 90_000);

	it("second scorer: a sum that is not the own parts' total is pointed out (the scorer's own arithmetic, never the reference)", async () => {
		const page = await person(ACCOUNTS.scorer2);
		await enter(page, SECOND);
		const warn = page.locator('#f-memory-index-sum-msg');
		// 13 + 14 entered above = 27; the warning names the scorer's own total, which here is also right — it is arithmetic, not a look-up
		expect(await warn.innerText()).toBe('The part scores you entered above add up to 27.');
		expect(await page.getByTestId('field-warning').count()).toBe(1);
		await submit(page, 'second');
		await page.context().close();
	}, 90_000);

	it('reviewer: the slips are named — adjacent row with the row read, carried composite that waits on its parts, sum error — then resolved and signed off; the summary leads with the composites', async () => {
		const stored = await select<{ test_code: string; field: string; pass: string; kind: string; value: string; expected: string }>(
			'SELECT test_code, field, pass, kind, value, expected FROM discrepancies WHERE protocol_id = :id ORDER BY position',
			{ id }
		);
		expect(stored).toEqual([
			{ test_code: 'tile-build', field: 'scaled', pass: 'first', kind: 'adjacent_row', value: '15', expected: '14' },
			{ test_code: 'memory-index', field: 'sum', pass: 'first', kind: 'carried', value: '28', expected: '27' },
			{ test_code: 'memory-index', field: 'sum', pass: 'second', kind: 'sum_error', value: '26', expected: '27' },
			{ test_code: 'memory-index', field: 'standard', pass: 'first', kind: 'carried', value: '123', expected: '120' },
			{ test_code: 'memory-index', field: 'percentile', pass: 'first', kind: 'carried', value: '94', expected: '91' }
		]);

		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		const adjacent = page.locator('[data-testid="discrepancy"][data-kind="adjacent_row"]');
		await adjacent.waitFor();
		// raw 16 sits in the row 16 (scaled 14); 15 is the row below, 17–18
		expect(await adjacent.getByTestId('card-context').innerText()).toBe(
			'Raw 16 is in the row 16 (score 14); the value entered is the row below, 17–18 (score 15).'
		);
		const carried = page.locator('[data-testid="discrepancy"][data-kind="carried"]').first();
		expect(await carried.getByTestId('card-context').innerText()).toContain('Waits on its parts');
		expect(await carried.getByTestId('card-context').innerText()).toContain('Parts (scaled scores): first pass 13 + 15, second pass 13 + 14');
		await page.screenshot({ path: `${SHOTS}/review-composites.png`, fullPage: true });
		// parts first, then the composite's fields: keep the recomputed value everywhere
		const open = page.locator('[data-testid="discrepancy"]', { has: page.getByRole('button', { name: 'Keep this value' }) });
		for (let guard = 0; guard < 10 && (await open.count()) > 0; guard++) {
			const item = open.first();
			const before = await open.count();
			await item.getByLabel('Recomputed').check();
			await item.getByTestId('resolve').click();
			try {
				await expect.poll(() => open.count(), { timeout: 30_000 }).toBeLessThan(before);
			} catch (e) {
				await page.screenshot({ path: `${SHOTS}/review-stuck.png`, fullPage: true });
				throw new Error(`resolution did not go through: ${await item.innerText()}`, { cause: e });
			}
		}
		await page.getByTestId('sign-off').click();
		await expect.poll(() => page.getByRole('status').allInnerTexts(), { timeout: 30_000 }).toContain('Verified and locked.');

		await page.goto(`${BASE_URL}/protocols/${id}/summary`);
		const first = page.locator('[data-testid="summary-table"] tbody').first();
		expect(await first.getAttribute('data-testid')).toBe('summary-composites');
		const mi = page.locator('tr[data-composite="memory-index"]');
		expect(await mi.locator('[data-field="sum"]').innerText()).toBe('Σ 27');
		expect(await mi.locator('[data-field="standard"]').innerText()).toBe('120');
		expect(await mi.locator('[data-field="percentile"]').innerText()).toBe('91');
		// AACN 2020 labels (Guilmette et al., 2020; from memory): standard 120–129 "Above average"
		expect(await mi.innerText()).toContain('Above average');
		// reliability .90: SEM = 15·√0.10 = 4.743; 1.96·4.743 = 9.30; 120 ± 9.30 = 110.70–129.30 → 111–129
		expect(await mi.locator('[data-field="ci"]').innerText()).toBe('111–129');
		const vi = page.locator('tr[data-composite="visuomotor-index"]');
		expect(await vi.locator('[data-field="standard"]').innerText()).toBe('106');
		// reliability .88: SEM = 15·√0.12 = 5.196; 1.96·5.196 = 10.18; 106 ± 10.18 = 95.82–116.18 → 96–116; 90–109 "Average"
		expect(await vi.locator('[data-field="ci"]').innerText()).toBe('96–116');
		expect(await vi.innerText()).toContain('Average');
		// the band as the kept pass wrote it, in words, and off the curve with the reason
		const beacon = page.locator('tr[data-test="beacon-slips"]');
		expect(await beacon.getByTestId('band').innerText()).toBe('50–74');
		expect(await beacon.innerText()).toContain('50th–74th percentile band');
		expect(await page.getByTestId('off-curve').innerText()).toContain('Not on the curve: Beacon Watch False Alarms.');
		// the bell curve names the composites among its points, and not the band
		const desc = await page.locator('#bell-desc').textContent();
		expect(desc).toContain('Memory Index: z 1.33');
		expect(desc).not.toContain('Beacon');
		await page.screenshot({ path: `${SHOTS}/summary-composites.png`, fullPage: true });
		await page.context().close();
	}, 180_000);
});

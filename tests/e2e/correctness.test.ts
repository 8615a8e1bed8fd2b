/**
 * Issue 12 in Chromium: the New protocol form offers a norm-group choice when no group covers the
 * examinee (item 6); the review keeps a keyboard choice and submits from the note with Enter, and a
 * reloaded draft puts the cursor in the first empty field (item 8); People asks before deactivating
 * anyone and offers no way to deactivate oneself (item 9). Screenshots go to $RUN_DIR.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { join } from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn, type Client } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, getPass, uniqueCode, userId, type Scores } from '../helpers/workflow';
import { select, selectOne, closeDb } from '../../src/lib/server/db';

let browser: Browser;
let lead: Client;
const shots = process.env.RUN_DIR ?? '/tmp';
const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };

beforeAll(async () => {
	browser = await launch();
	lead = await signedIn('lead');
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

describe('item 6: New protocol when no norm group covers the examinee', () => {
	it('shows the error and a group choice with a reason per test, then creates the protocol', async () => {
		const page = await person(ACCOUNTS.lead);
		const code = uniqueCode('KID');
		await page.goto(`${BASE_URL}/protocols/new`);
		await page.fill('#code', code);
		// 2012-03-01 to 2026-11-20 is 14;8;19 = 176 months: under the youngest demo group (18;0 = 216 months)
		await page.fill('#birthDate', '2012-03-01');
		await page.selectOption('#batteryId', { label: 'Harbourview Brief Screen (5 tests)' });
		await page.fill('#testDate', '2026-11-20');
		await page.selectOption('#firstScorerId', String(await userId(ACCOUNTS.scorer)));
		await page.selectOption('#secondScorerId', String(await userId(ACCOUNTS.scorer2)));
		await page.selectOption('#reviewerId', String(await userId(ACCOUNTS.reviewer)));
		await page.getByRole('button', { name: 'Create protocol' }).click();
		const box = page.getByTestId('group-override');
		await box.waitFor().catch(async (e) => {
			await page.screenshot({ path: join(shots, 'new-protocol-failed.png'), fullPage: true });
			throw new Error(`${e}: at ${page.url()}: ${(await page.locator('main').textContent())?.slice(0, 1500)}`);
		});
		expect(await box.getByRole('alert').textContent()).toContain('No norm group of this norm set covers the examinee');
		const selects = box.locator('select');
		expect(await selects.count()).toBe(5);
		// the typed values survived the round trip
		expect(await page.inputValue('#code')).toBe(code);
		await page.screenshot({ path: join(shots, 'new-protocol-group-override.png'), fullPage: true });
		for (const test of ['speeded-match', 'word-recall', 'word-recall-delayed', 'switch-rule']) {
			await page.selectOption(`#override-${test}`, 'a18');
			await page.fill(`#reason-${test}`, 'Youngest band available; no adolescent norms.');
		}
		await page.selectOption('#override-word-harvest', 'a18-e13');
		await page.fill('#reason-word-harvest', 'Youngest band, 13+ years split.');
		await page.getByRole('button', { name: 'Create protocol' }).click();
		await page.waitForURL(/\/protocols\/\d+\?created=1/);
		const id = Number(page.url().match(/\/protocols\/(\d+)/)![1]);
		const reasons = await select<{ override_reason: string | null }>('SELECT override_reason FROM protocol_tests WHERE protocol_id = :id', { id });
		expect(reasons.length).toBe(5);
		expect(reasons.every((r) => (r.override_reason ?? '').length > 5)).toBe(true);
		await page.context().close();
	}, 90_000);
});

describe('item 8: keyboard on Review and Entry', () => {
	it('Space on "First pass", Tab through "Other value": the choice stays First pass; Enter in the note keeps it', async () => {
		const id = await createViaForm(lead, duties);
		const first = await correctScores(id, { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 });
		const second: Scores = JSON.parse(JSON.stringify(first));
		second['word-recall'].standard = first['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2'); // transposition in the second pass
		expect((await saveAndSubmit(await signedIn('scorer'), id, first)).status).toBe(200);
		expect((await saveAndSubmit(await signedIn('scorer2'), id, second)).status).toBe(200);
		const [d] = await select<{ id: number }>('SELECT id FROM discrepancies WHERE protocol_id = :id', { id });

		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		const card = page.getByTestId('discrepancy').first();
		await card.locator('input[type=radio][value=first]').focus();
		await page.keyboard.press('Space');
		expect(await card.locator('input[type=radio][value=first]').isChecked()).toBe(true);
		await page.keyboard.press('Tab');
		expect(await page.evaluate(() => document.activeElement?.getAttribute('aria-label'))).toBe('Other value');
		await page.keyboard.press('Tab');
		expect(await page.evaluate(() => document.activeElement?.id)).toBe(`note-${d.id}`);
		expect(await card.locator('input[type=radio][value=first]').isChecked()).toBe(true);
		expect(await card.locator('input[type=radio][value=other]').isChecked()).toBe(false);
		await page.keyboard.type('Checked against the record form.');
		await page.keyboard.press('Enter');
		await card.getByText(/kept/).waitFor({ timeout: 15_000 });
		const row = (await selectOne<{ resolution: string; note: string }>('SELECT resolution, note FROM discrepancies WHERE id = :id', { id: d.id }))!;
		expect(row).toEqual({ resolution: 'first', note: 'Checked against the record form.' });
		await page.screenshot({ path: join(shots, 'review-keyboard.png'), fullPage: true });
		await page.context().close();
	}, 90_000);

	it('"Other value" that is not a number, with no note: the message names the value, not the missing note (walk-through finding)', async () => {
		const id = await createViaForm(lead, duties);
		const first = await correctScores(id, { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 });
		const second: Scores = JSON.parse(JSON.stringify(first));
		second['word-recall'].standard = first['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2');
		expect((await saveAndSubmit(await signedIn('scorer'), id, first)).status).toBe(200);
		expect((await saveAndSubmit(await signedIn('scorer2'), id, second)).status).toBe(200);
		const page = await person(ACCOUNTS.reviewer);
		await page.goto(`${BASE_URL}/protocols/${id}/review`);
		const card = page.getByTestId('discrepancy').first();
		await card.locator('input[aria-label="Other value"]').fill('abc');
		await card.getByTestId('resolve').click();
		const alert = card.getByRole('alert');
		await alert.waitFor({ timeout: 15_000 });
		expect(await alert.textContent()).toContain('The value to keep is not valid');
		// an empty "Other value" is named before anything else
		await card.locator('input[aria-label="Other value"]').fill('');
		await card.locator('input[type=radio][value=other]').check();
		await card.getByTestId('resolve').click();
		await expect.poll(() => alert.textContent()).toContain('Enter the value to keep.');
		const [row] = await select<{ resolution: string | null }>('SELECT resolution FROM discrepancies WHERE protocol_id = :id', { id });
		expect(row.resolution).toBeNull();
		await page.context().close();
	}, 90_000);

	it('after a draft reload the cursor is in the first empty field, not the first field', async () => {
		const id = await createViaForm(lead, duties);
		const s1 = await signedIn('scorer');
		const all = await correctScores(id, {});
		// a draft with the first test's fields filled (Speeded Figure Match: raw, then its reported scores)
		const [firstTest] = Object.keys(all);
		const draft: Scores = { [firstTest]: all[firstTest] };
		const pass = await getPass(s1, id);
		const put = await s1.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores: draft, draftVersion: pass.body.draftVersion } });
		expect(put.status).toBe(200);
		const ids = (
			await select<{ code: string }>('SELECT t.code FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = :id ORDER BY pt.position', {
				id
			})
		).map((r) => r.code);
		expect(ids[0]).toBe(firstTest);

		const page = await person(ACCOUNTS.scorer);
		await page.goto(`${BASE_URL}/protocols/${id}/entry`);
		await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
		// the next test's raw score is the first field left empty
		expect(await page.evaluate(() => document.activeElement?.id)).toBe(`f-${ids[1]}-raw`);
		await page.reload();
		await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
		expect(await page.evaluate(() => document.activeElement?.id)).toBe(`f-${ids[1]}-raw`);
		await page.context().close();
	}, 90_000);
});

describe('item 9: People asks before deactivating, and never offers it for oneself', () => {
	it('a confirmation dialog names the person; Cancel changes nothing; the own row has no Deactivate', async () => {
		const admin = await signedIn('admin');
		const email = `confirm-${Date.now().toString(36)}@demo.crosstally.test`;
		const inv = await admin.action('/people?/invite', { email, name: 'Dana Confirm', roles: 'scorer' });
		expect(inv.body.type).toBe('success');
		const target = await userId(email);
		const me = await userId(ACCOUNTS.admin);

		const page = await person(ACCOUNTS.admin);
		await page.goto(`${BASE_URL}/people`);
		expect(await page.getByTestId(`toggle-active-${me}`).textContent()).toContain('Your account');
		expect(await page.locator(`button[data-testid="toggle-active-${me}"]`).count()).toBe(0);

		await page.getByTestId(`toggle-active-${target}`).click();
		const dialog = page.locator('dialog[open]');
		await dialog.waitFor();
		expect(await dialog.textContent()).toContain('Deactivate Dana Confirm?');
		await page.screenshot({ path: join(shots, 'people-confirm-deactivate.png') });
		await dialog.getByRole('button', { name: 'Cancel' }).click();
		await page.locator('dialog[open]').waitFor({ state: 'detached' });
		expect((await selectOne<{ active: number }>('SELECT active FROM users WHERE id = :id', { id: target }))!.active).toBe(1);

		await page.getByTestId(`toggle-active-${target}`).click();
		await page.getByTestId('confirm-deactivate').click();
		await page.locator(`button[data-testid="toggle-active-${target}"]`, { hasText: 'Reactivate' }).waitFor();
		expect((await selectOne<{ active: number }>('SELECT active FROM users WHERE id = :id', { id: target }))!.active).toBe(0);
		await page.context().close();
	}, 90_000);
});

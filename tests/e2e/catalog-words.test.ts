/**
 * Norm groups on the Catalog screens are named by what they cover ("ages 30;0–39;11, 13–30 years of
 * education"), never by their code (`a30`, `a30-e13`): every catalog screen is loaded in Chromium as
 * a lead (who sees the edit controls too) and its visible text, accessible names (aria-label),
 * titles and placeholders are searched for the demo's group codes. CSV exports keep `group_code`
 * as their identifier column and are not screens.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD } from '../helpers/http';
import { closeDb, select, selectOne } from '../../src/lib/server/db';

let browser: Browser;
let page: Page;
let setId = 0;
let batteryId = 0;
let codes: string[] = [];

beforeAll(async () => {
	browser = await launch();
	page = await (await browser.newContext({ viewport: { width: 1440, height: 900 } })).newPage();
	await signIn(page, ACCOUNTS.lead, DEMO_PASSWORD);
	setId = (await selectOne<{ id: number }>("SELECT id FROM norm_sets WHERE code = 'harbourview-adult'"))!.id;
	batteryId = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'core-adult'"))!.id;
	codes = (await select<{ group_code: string }>('SELECT DISTINCT group_code FROM norm_groups WHERE norm_set_id = :s', { s: setId })).map((r) => r.group_code);
}, 120_000);

afterAll(async () => {
	await browser?.close();
	await closeDb();
});

/** Everything a person reads or hears on the page: visible text, aria-labels, titles, placeholders. */
async function screenText(path: string): Promise<string> {
	const res = await page.goto(`${BASE_URL}${path}`, { waitUntil: 'load' });
	expect(res?.status(), path).toBe(200);
	return page.evaluate(() =>
		[
			document.body.innerText,
			...[...document.querySelectorAll('[aria-label],[title],[placeholder]')].flatMap((e) =>
				['aria-label', 'title', 'placeholder'].map((a) => e.getAttribute(a) ?? '')
			)
		].join('\n')
	);
}

/** A group code standing as a word of its own (not inside another word or a number). */
const codeIn = (text: string, code: string) => new RegExp(`(^|[^A-Za-z0-9_-])${code.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}($|[^A-Za-z0-9_-])`).test(text);

describe('Catalog screens name norm groups by what they cover', () => {
	it('no screen shows a group code; the norm set shows each group in words', async () => {
		// the demo's codes (db/seeds/catalog.ts): a18 … a70, and a30-e0 / a30-e13 for the test normed by education
		expect(codes).toEqual(expect.arrayContaining(['a18', 'a30', 'a70', 'a30-e0', 'a30-e13']));
		const screens = [
			'/catalog',
			'/catalog/tests',
			'/catalog/tests/word-recall',
			'/catalog/tests/word-harvest',
			'/catalog/norm-sets',
			`/catalog/norm-sets/${setId}`,
			`/catalog/norm-sets/${setId}?test=word-harvest`,
			'/catalog/batteries',
			`/catalog/batteries/${batteryId}`,
			'/catalog/import'
		];
		for (const path of screens) {
			const text = await screenText(path);
			const shown = codes.filter((c) => codeIn(text, c));
			expect(shown, `${path} shows group codes`).toEqual([]);
		}
		// the words, worked out by hand from the seed's bands: 360 months = 30;0, 479 = 39 × 12 + 11 = 39;11;
		// 840 = 70;0, 1079 = 89 × 12 + 11 = 89;11; word-harvest's education bands are 0–12 and 13–30 years
		const all = await screenText(`/catalog/norm-sets/${setId}`);
		expect(all).toContain('ages 30;0–39;11');
		expect(all).toContain('ages 70;0–89;11');
		const harvest = await screenText(`/catalog/norm-sets/${setId}?test=word-harvest`);
		expect(harvest).toContain('ages 30;0–39;11, up to 12 years of education');
		expect(harvest).toContain('ages 30;0–39;11, 13–30 years of education');
		// the row actions say which group they act on, in words
		expect(harvest).toContain('Remove the group for ages 30;0–39;11, 13–30 years of education of Word Harvest');
	}, 180_000);
});

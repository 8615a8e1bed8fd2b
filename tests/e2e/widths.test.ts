/**
 * Every screen at every width, in Chromium: 390 px (a phone), 768 px (a tablet upright), 1024 px
 * (a tablet on its side, a small laptop) and 1440 px (a desktop). On each, each role's screens must
 * not scroll the page sideways (document.scrollWidth <= innerWidth) and must pass axe-core's WCAG
 * 2.1 A/AA rules (serious and critical). Below 1024 px the navigation is a menu behind a button
 * (aria-expanded, keyboard); Entry is one card per test on a phone and keeps its keyboard order;
 * Worklist and People stack their rows; Review puts the record form under the cards.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn, caughtMail, waitFor } from '../helpers/http';
import { throughWorkflow, createViaForm, uniqueCode } from '../helpers/workflow';
import { tidewaterProtocol, tidewaterCarriedSlip } from '../helpers/tidewater';
import { seriousViolations, describeViolations } from '../helpers/axe';
import { closeDb, selectOne } from '../../src/lib/server/db';
import { ACCOUNTS as SEEDED } from '../../db/seeds/accounts';

const WIDTHS = [390, 768, 1024, 1440];
let browser: Browser;
const ids = { draft: 0, review: 0, verified: 0, twDraft: 0, twReview: 0, twVerified: 0, battery: 0, normSet: 0, mail: '' };

beforeAll(async () => {
	browser = await launch();
	const lead = await signedIn('lead');
	const first = await signedIn('scorer');
	const second = await signedIn('scorer2');
	const reviewer = await signedIn('reviewer');
	const who = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
	ids.draft = await createViaForm(lead, { ...who, battery: 'core-adult', code: uniqueCode('W') });
	ids.review = await throughWorkflow(
		{ lead, first, second, reviewer },
		{ ...who, battery: 'core-adult', code: uniqueCode('W'), secondChanges: { 'word-recall': { standard: '611' } } }
	);
	ids.verified = await throughWorkflow(
		{ lead, first, second, reviewer },
		{ ...who, battery: 'core-adult', code: uniqueCode('W'), secondChanges: { 'word-recall': { standard: '611' } }, verify: true }
	);
	// the Tidewater battery: composites after their parts, composite cards, composites first and a band on the Summary
	ids.twDraft = await createViaForm(lead, { ...who, battery: 'tidewater-profile', code: uniqueCode('WT'), birthDate: '1990-03-10', testDate: '2025-11-20' });
	ids.twReview = await tidewaterProtocol({ lead, first, second, reviewer }, { ...who, code: uniqueCode('WT') }, { first: tidewaterCarriedSlip() });
	ids.twVerified = await tidewaterProtocol(
		{ lead, first, second, reviewer },
		{ ...who, code: uniqueCode('WT') },
		{ first: tidewaterCarriedSlip(), verify: true }
	);
	ids.battery = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'core-adult'"))!.id;
	ids.normSet = (await selectOne<{ id: number }>('SELECT id FROM norm_sets ORDER BY id LIMIT 1'))!.id;
	// a caught message for the mailbox's message screen
	const admin = await signedIn('admin');
	const email = `width-${Date.now()}@clinic.test`;
	const inv = await admin.action('/people?/invite', { name: 'Wren Okoye', email, roles: ['scorer'] });
	expect(inv.status).toBe(200);
	// People as the full suite leaves it, so that this file alone shows what a full run shows: a whole
	// run shares one database, and other files leave their accounts in it. In a table what widens a
	// column is a value's longest run the browser may not break (a space, a hyphen before a letter and
	// EmailAddress's <wbr> after the "@" and before a dot break a run; a dot alone does not), so the
	// accounts below copy the worst the suite writes (every name and address created in tests/, through
	// People, createUser or INSERT INTO users, by grep, session 8):
	// - the longest name without a break: audit.test.ts's '=HYPERLINK("http://x.test","Odd")' (33 characters);
	// - the longest address and the longest run in one: security.test.ts's
	//   `log.probe.${Date.now()}@demo.crosstally.test` (44 characters, "log.probe.<13 digits>@" 24 without a
	//   hyphen; next sign-in-security's `colleague-${Date.now()}-xxxx@clinic.test`, 40, and
	//   mail-batches' `batch-refusal-1-${Date.now()}@clinic.test`, 41, broken by their hyphens);
	// - this file's own long name and address: the longest in characters (66 and 98), but their hyphens
	//   break them into short runs;
	// - a deactivated account: "Deactivated" is the widest status (auth and session tests leave some),
	//   beside the invited one's two buttons, "Resend invitation" and "Deactivate".
	// None of them may widen the page or the list's box at any width, and the demo accounts' ordinary
	// names beside them must keep their words whole (the People test below).
	const longEmail = `width-check-a-rather-long-local-part-${Date.now()}@a-clinic-with-a-long-domain-name.example.test`;
	const long = await admin.action('/people?/invite', {
		name: 'Width-Check-With-A-Rather-Long-Display-Name-Written-Without-Spaces',
		email: longEmail,
		roles: ['scorer']
	});
	expect(long.body.type).toBe('success');
	const worst = await admin.action('/people?/invite', {
		name: '=HYPERLINK("http://x.test","Odd")',
		email: `log.probe.${Date.now()}@demo.crosstally.test`,
		// scorer only: an active lead would be copied in on the escalated reminders notifications.test.ts checks
		roles: ['scorer']
	});
	expect(worst.body.type).toBe('success');
	const leaver = await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email: longEmail });
	expect((await admin.action('/people?/active', { id: String(leaver!.id), active: '0' })).body.type).toBe('success');
	const [mail] = await waitFor(async () => {
		const m = await caughtMail(email);
		return m.length ? m : null;
	}, 30_000);
	ids.mail = mail.id;
	// the protocol in review lists its review e-mail under "Messages sent" (long addresses must wrap)
	await waitFor(async () => {
		const r = await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM mail_log WHERE protocol_id = :id AND status = 'sent'", { id: ids.review });
		return Number(r?.n) > 0 ? true : null;
	}, 30_000);
}, 240_000);

afterAll(async () => {
	await browser?.close();
	await closeDb();
});

type Role = 'anon' | 'scorer' | 'reviewer' | 'lead' | 'admin';
const SCREENS: { role: Role; name: string; path: () => string }[] = [
	{ role: 'anon', name: 'sign-in', path: () => '/signin' },
	{ role: 'anon', name: 'forgot password', path: () => '/forgot' },
	{ role: 'scorer', name: 'worklist', path: () => '/' },
	{ role: 'scorer', name: 'protocols', path: () => '/protocols' },
	{ role: 'scorer', name: 'protocol', path: () => `/protocols/${ids.draft}` },
	{ role: 'scorer', name: 'entry', path: () => `/protocols/${ids.draft}/entry` },
	{ role: 'reviewer', name: 'worklist', path: () => '/' },
	{ role: 'reviewer', name: 'review', path: () => `/protocols/${ids.review}/review` },
	{ role: 'reviewer', name: 'summary', path: () => `/protocols/${ids.verified}/summary` },
	{ role: 'scorer', name: 'entry (composites)', path: () => `/protocols/${ids.twDraft}/entry` },
	{ role: 'reviewer', name: 'review (composites)', path: () => `/protocols/${ids.twReview}/review` },
	{ role: 'reviewer', name: 'summary (composites)', path: () => `/protocols/${ids.twVerified}/summary` },
	{ role: 'lead', name: 'new protocol', path: () => '/protocols/new' },
	{ role: 'lead', name: 'protocol with messages sent', path: () => `/protocols/${ids.review}` },
	{ role: 'lead', name: 'audit', path: () => '/audit' },
	{ role: 'lead', name: 'catalog', path: () => '/catalog' },
	{ role: 'lead', name: 'tests', path: () => '/catalog/tests' },
	{ role: 'lead', name: 'test', path: () => '/catalog/tests/word-recall' },
	{ role: 'lead', name: 'batteries', path: () => '/catalog/batteries' },
	{ role: 'lead', name: 'battery', path: () => `/catalog/batteries/${ids.battery}` },
	{ role: 'lead', name: 'norm sets', path: () => '/catalog/norm-sets' },
	{ role: 'lead', name: 'norm set', path: () => `/catalog/norm-sets/${ids.normSet}` },
	{ role: 'lead', name: 'import', path: () => '/catalog/import' },
	{ role: 'admin', name: 'people', path: () => '/people' },
	{ role: 'admin', name: 'mailbox', path: () => '/mailbox' },
	{ role: 'admin', name: 'message', path: () => `/mailbox/${ids.mail}` },
	{ role: 'admin', name: 'settings', path: () => '/settings' }
];

/** Two animation frames: layout and the components that measure their box have caught up with a resize. */
const settle = (page: Page) => page.evaluate(() => new Promise<void>((r) => requestAnimationFrame(() => requestAnimationFrame(() => r()))));

async function as(role: Role): Promise<Page> {
	const ctx = await browser.newContext({ viewport: { width: 1440, height: 900 }, bypassCSP: true });
	const page = await ctx.newPage();
	if (role !== 'anon') await signIn(page, ACCOUNTS[role], DEMO_PASSWORD);
	return page;
}

/** The widest elements that stick out of the viewport (and are not inside a box that scrolls), for the failure message. */
async function overflowReport(page: Page): Promise<{ scrollWidth: number; innerWidth: number; culprits: string[] }> {
	return page.evaluate(`(() => {
		const iw = innerWidth;
		const inScroller = (e) => { for (let a = e.parentElement; a && a !== document.body; a = a.parentElement) if (getComputedStyle(a).overflowX !== 'visible') return true; return false; };
		const culprits = [...document.querySelectorAll('body *')]
			.filter((e) => e.getBoundingClientRect().right > iw + 0.5 && !inScroller(e))
			.slice(-5)
			.map((e) => e.tagName.toLowerCase() + '.' + String(e.className).slice(0, 60) + ' right=' + Math.round(e.getBoundingClientRect().right));
		return { scrollWidth: document.documentElement.scrollWidth, innerWidth: iw, culprits };
	})()`);
}

type PeopleWord = { word: string; email: string; lines: number; width: number; room: number };

/**
 * People's names and addresses, word by word, as drawn. A word is a run the page should break only
 * as a last resort: in a name, a run without a space, ending after a hyphen (a line may end there);
 * in an address, a run between the "@" (it ends one), the dots (each starts one), hyphens and commas
 * (EmailAddress offers a break after the "@" and before each dot). Its line boxes are the distinct
 * tops of Range.getClientRects() over it; its width unbroken the sum of their widths; `room` its
 * cell's content box, the widest line it can have.
 */
async function peopleWords(page: Page): Promise<PeopleWord[]> {
	return page.getByTestId('people-table').evaluate((t) => {
		const out: PeopleWord[] = [];
		for (const tr of t.querySelectorAll('tbody tr')) {
			const mailCell = tr.querySelector<HTMLElement>('td[data-label="E-mail"]')!;
			const email = mailCell.textContent!.trim();
			for (const [cell, re] of [
				[tr.querySelector<HTMLElement>('td')!, /[^\s-]+-?/g],
				[mailCell, /\.?[^\s.@,-]+[@,-]?/g]
			] as const) {
				const cs = getComputedStyle(cell);
				const room = cell.clientWidth - parseFloat(cs.paddingLeft) - parseFloat(cs.paddingRight);
				const walker = document.createTreeWalker(cell, NodeFilter.SHOW_TEXT);
				for (let n = walker.nextNode() as Text | null; n; n = walker.nextNode() as Text | null) {
					for (const m of n.data.matchAll(re)) {
						const r = document.createRange();
						r.setStart(n, m.index);
						r.setEnd(n, m.index + m[0].length);
						const rects = [...r.getClientRects()].filter((x) => x.width > 0);
						if (!rects.length) continue;
						const lines = new Set(rects.map((x) => Math.round(x.top))).size;
						out.push({ word: m[0], email, lines, width: rects.reduce((sum, x) => sum + x.width, 0), room });
					}
				}
			}
		}
		return out;
	});
}

/** What sticks out of its cell in People's table: every text fragment and element box (a Range over the cell's contents) must lie inside the cell. */
async function peopleOutsideCells(page: Page): Promise<string[]> {
	return page.getByTestId('people-table').evaluate((t) =>
		[...t.querySelectorAll<HTMLElement>('tbody td')].flatMap((td) => {
			const box = td.getBoundingClientRect();
			const r = document.createRange();
			r.selectNodeContents(td);
			return [...r.getClientRects()]
				.filter((x) => x.width > 0 && (x.left < box.left - 0.5 || x.right > box.right + 0.5))
				.slice(0, 1)
				.map(
					(x) =>
						`${td.getAttribute('data-label') ?? 'cell'} ${Math.round(x.left)}–${Math.round(x.right)} outside ${Math.round(box.left)}–${Math.round(box.right)}: ${td.textContent?.trim().slice(0, 50)}`
				);
		})
	);
}

describe('every screen at every width: no sideways page scroll, axe clean', () => {
	for (const role of ['anon', 'scorer', 'reviewer', 'lead', 'admin'] as Role[]) {
		it(`${role}: ${SCREENS.filter((s) => s.role === role)
			.map((s) => s.name)
			.join(', ')}`, async () => {
			const page = await as(role);
			const failures: string[] = [];
			for (const screen of SCREENS.filter((s) => s.role === role)) {
				// One load per screen (at the narrowest width), then the window is resized to each wider
				// width: the server renders the same HTML whatever the width, so a reload per width only
				// repeated the load (a quarter of the time); layout, the menu and the charts that measure
				// their box follow the resize (settle: two animation frames).
				for (const [i, w] of WIDTHS.entries()) {
					await page.setViewportSize({ width: w, height: 900 });
					if (i === 0) {
						const res = await page.goto(`${BASE_URL}${screen.path()}`, { waitUntil: 'networkidle' });
						expect(res?.status(), `${screen.name} at ${w}`).toBe(200);
					}
					// screens that load their figures after the page (Audit) say so with aria-busy
					await page.waitForFunction(() => !document.querySelector('[aria-busy="true"]'), undefined, { timeout: 30_000 });
					await settle(page);
					if (process.env.WIDTH_SHOTS)
						await page.screenshot({ path: `test-results/widths/${role}-${screen.name.replace(/\W+/g, '-')}-${w}.png`, fullPage: true });
					const o = await overflowReport(page);
					if (o.scrollWidth > o.innerWidth) failures.push(`${screen.name} at ${w} px scrolls sideways to ${o.scrollWidth}: ${o.culprits.join(' | ')}`);
					const v = await seriousViolations(page);
					if (v.length) failures.push(`${screen.name} at ${w} px, axe: ${describeViolations(v)}`);
				}
			}
			expect(failures, failures.join('\n')).toEqual([]);
			await page.context().close();
		}, 600_000);
	}
});

describe('the layout at each width', () => {
	it('below 1024 px the navigation is a menu behind a button, usable by keyboard; from 1024 px it is always shown', async () => {
		const page = await as('lead');
		const nav = page.getByRole('navigation', { name: 'Main' });
		for (const w of [390, 768]) {
			await page.setViewportSize({ width: w, height: 900 });
			await page.goto(`${BASE_URL}/`);
			const button = page.getByTestId('menu-button');
			expect(await button.isVisible()).toBe(true);
			expect(await button.getAttribute('aria-expanded')).toBe('false');
			expect(await button.getAttribute('aria-controls')).toBe('main-nav');
			expect(await nav.isVisible()).toBe(false);
			// keyboard: focus the button, Enter opens, the links are reachable with Tab, Escape closes and returns focus
			await button.focus();
			await page.keyboard.press('Enter');
			expect(await button.getAttribute('aria-expanded')).toBe('true');
			expect(await nav.isVisible()).toBe(true);
			expect((await nav.getByRole('link').allInnerTexts()).map((t) => t.trim())).toEqual(['Worklist', 'Protocols', 'Audit', 'Catalog']);
			await page.keyboard.press('Tab');
			expect(await page.evaluate(() => document.activeElement?.textContent?.trim())).toBe('Worklist');
			await page.keyboard.press('Escape');
			expect(await button.getAttribute('aria-expanded')).toBe('false');
			expect(await page.evaluate(() => document.activeElement?.getAttribute('data-testid'))).toBe('menu-button');
			// following a link closes the menu
			await button.click();
			await nav.getByRole('link', { name: 'Catalog' }).click();
			await page.waitForURL(/\/catalog$/);
			expect(await button.getAttribute('aria-expanded')).toBe('false');
		}
		for (const w of [1024, 1440]) {
			await page.setViewportSize({ width: w, height: 900 });
			await page.goto(`${BASE_URL}/`);
			expect(await page.getByTestId('menu-button').isVisible()).toBe(false);
			expect(await nav.isVisible()).toBe(true);
			const box = (await nav.boundingBox())!;
			expect(box.x).toBe(0);
			expect(box.width).toBe(224); // the left column, w-56
		}
		await page.context().close();
	}, 120_000);

	it('Entry: one card per test below 1280 px, raw score first, keyboard order unchanged; a table at 1440 px', async () => {
		const page = await as('scorer');
		for (const w of [390, 768, 1024, 1440]) {
			await page.setViewportSize({ width: w, height: 900 });
			await page.goto(`${BASE_URL}/protocols/${ids.draft}/entry`);
			const firstRow = page.locator('.entry-table tbody tr').first();
			const display = await firstRow.evaluate((e) => getComputedStyle(e).display);
			expect(display, `at ${w}`).toBe(w < 1280 ? 'grid' : 'table-row');
			// the first field focused is the first test's raw score, and Enter walks the administration order
			const order = await page.locator('.entry-table input').evaluateAll((es) => es.map((e) => e.id));
			expect(order[0]).toMatch(/-raw$/);
			expect(await page.evaluate(() => document.activeElement?.id)).toBe(order[0]);
			await page.keyboard.press('Enter');
			expect(await page.evaluate(() => document.activeElement?.id)).toBe(order[1]);
			await page.keyboard.press('Enter');
			expect(await page.evaluate(() => document.activeElement?.id)).toBe(order[2]);
			if (w < 1280) {
				// in a card, each field sits under its own visible label, raw score first, and the
				// card's fields read left to right, top to bottom in the order the keyboard takes
				const cells = await firstRow
					.locator('td')
					.evaluateAll((tds) =>
						tds
							.filter((td) => getComputedStyle(td).display !== 'none')
							.map((td) => ({ label: getComputedStyle(td, '::before').content, box: td.getBoundingClientRect().toJSON() as DOMRect }))
					);
				expect(cells[0].label).toBe('"Raw score"');
				for (let i = 1; i < cells.length; i++) {
					const a = cells[i - 1].box,
						b = cells[i].box;
					expect(b.top > a.top + 1 || (Math.abs(b.top - a.top) <= 1 && b.left > a.left), `${w}: cell ${i} after cell ${i - 1}`).toBe(true);
				}
				// every card fits inside the viewport
				const right = await page.locator('.entry-table tbody tr').evaluateAll((rs) => Math.max(...rs.map((r) => r.getBoundingClientRect().right)));
				expect(right).toBeLessThanOrEqual(w);
			}
		}
		await page.context().close();
	}, 120_000);

	it('Entry on a phone: a field that takes focus scrolls clear of the sticky Submit bar', async () => {
		const page = await as('scorer');
		for (const [w, h] of [
			[390, 700],
			[768, 600]
		]) {
			await page.setViewportSize({ width: w, height: h });
			await page.goto(`${BASE_URL}/protocols/${ids.draft}/entry`);
			await page.waitForFunction(() => document.activeElement?.id?.startsWith('f-'));
			const count = await page.locator('form input[id^="f-"]').count();
			const covered: string[] = [];
			// Tab through every field (focus only, nothing typed): each must end above the bar
			for (let i = 0; i < count; i++) {
				const r = await page.evaluate(() => {
					const a = document.activeElement!.getBoundingClientRect();
					const bar = document.querySelector('[data-testid="submit-bar"]')!.getBoundingClientRect();
					return { id: document.activeElement!.id, bottom: a.bottom, top: a.top, barTop: bar.top };
				});
				if (r.bottom > r.barTop || r.top < 0) covered.push(`${r.id} at ${w}: ${Math.round(r.top)}–${Math.round(r.bottom)}, bar from ${Math.round(r.barTop)}`);
				await page.keyboard.press('Tab');
			}
			expect(covered, covered.join('\n')).toEqual([]);
			// a warning that appears under a field low on the screen is scrolled above the bar as well
			// (and a decimal comma is named as such); the field is emptied again afterwards
			const low = await page.evaluate(() => {
				const bar = document.querySelector('[data-testid="submit-bar"]')!.getBoundingClientRect().top;
				return [...document.querySelectorAll<HTMLInputElement>('form input[id$="-raw"]')].find((e) => e.getBoundingClientRect().bottom > bar - 60)?.id ?? null;
			});
			if (low) {
				await page.focus(`#${low}`);
				await page.keyboard.type('12,5');
				const warning = page.locator(`#${low}-msg`);
				await expect.poll(() => warning.innerText()).toBe('Use a decimal point, not a comma (12.5, not 12,5).');
				await page.waitForTimeout(100);
				const r = await page.evaluate((id) => {
					const m = document.getElementById(`${id}-msg`)!.getBoundingClientRect();
					return { bottom: m.bottom, barTop: document.querySelector('[data-testid="submit-bar"]')!.getBoundingClientRect().top };
				}, low);
				expect(r.bottom, `${low}'s warning at ${w}`).toBeLessThanOrEqual(r.barTop);
				await page.keyboard.press('Control+A');
				await page.keyboard.press('Backspace');
				await expect.poll(() => page.getByTestId('save-state').innerText(), { timeout: 10_000 }).toContain('Draft saved');
			}
		}
		await page.context().close();
	}, 120_000);

	it('Worklist, Protocols, People and the catalog lists stack their rows on a phone (nothing scrolls sideways, not even inside the list) and are tables from 768 px', async () => {
		for (const [role, path, testid] of [
			['scorer', '/', 'worklist'],
			['lead', '/protocols', 'protocol-list'],
			['scorer', '/protocols', 'protocol-list'],
			['admin', '/people', 'people-table'],
			// the catalog's lists: on a phone no column is cut off at the edge of a sideways-scrolling box
			['lead', '/catalog/tests', 'tests-table'],
			['lead', `/catalog/batteries/${ids.battery}`, 'battery-order']
		] as const) {
			const page = await as(role);
			for (const w of WIDTHS) {
				await page.setViewportSize({ width: w, height: 900 });
				await page.goto(`${BASE_URL}${path}`);
				const table = page.getByTestId(testid);
				const row = table.locator('tbody tr').first();
				expect(await row.evaluate((e) => getComputedStyle(e).display), `${path} at ${w}`).toBe(w < 768 ? 'block' : 'table-row');
				// the header row is kept for screen readers but takes no room on a phone
				const head = await table.locator('thead').boundingBox();
				if (w < 768) expect(head!.height).toBeLessThanOrEqual(1);
				else expect(head!.height).toBeGreaterThan(20);
				// on a phone the list fits its box: no sideways scroll inside it either
				if (w < 768) {
					const fit = await table.evaluate((t) => {
						const box = t.parentElement!;
						const edge = box.getBoundingClientRect().left + box.clientWidth;
						// for the message: the cells that stick out of the box
						// body cells first: the header cells (kept for screen readers, clipped) are listed last
						const wide = [...t.querySelectorAll('td'), ...t.querySelectorAll('th')]
							.filter((c) => c.getBoundingClientRect().right > edge + 0.5)
							.slice(0, 3)
							.map((c) => `${c.getAttribute('data-label') ?? c.tagName}: ${c.textContent?.trim().slice(0, 40)}`);
						return { box: box.clientWidth, scroll: box.scrollWidth, wide };
					});
					expect(fit.scroll, `${path} as ${role} at ${w}: the list's box scrolls sideways (${fit.wide.join(' | ')})`).toBeLessThanOrEqual(fit.box);
				}
			}
			if (testid === 'people-table') {
				// at 1280 px (the invitation form under the table until 1536 px): addresses wrap after the "@"
				// and nothing is cut at the box's edge (the Deactivate buttons were)
				await page.setViewportSize({ width: 1280, height: 900 });
				await page.goto(`${BASE_URL}${path}`);
				const table = page.getByTestId(testid);
				const fit = await table.evaluate((t) => ({ box: t.parentElement!.clientWidth, scroll: t.parentElement!.scrollWidth }));
				expect(fit.scroll, 'People at 1280 px scrolls sideways inside its box').toBeLessThanOrEqual(fit.box);
				const mail = await table.locator('td[data-label="E-mail"]').first().innerHTML();
				expect(mail.replace(/<!--[^]*?-->/g, '')).toMatch(/@(<\/span>)?<wbr>/); // hydration markers aside
			}
			await page.context().close();
		}
	}, 120_000);

	it('People from 768 px: nothing scrolls sideways or sticks out of its cell, with the longest values the suite leaves; an ordinary word is never split, a longer run only where it is longer than its column', async () => {
		const page = await as('admin');
		await page.goto(`${BASE_URL}/people`, { waitUntil: 'networkidle' });
		const seeded = new Set(SEEDED.map((a) => a.email));
		for (const w of [768, 1024, 1280, 1536]) {
			await page.setViewportSize({ width: w, height: 900 });
			await settle(page);
			// the page, the list's box and each cell hold their content
			const o = await overflowReport(page);
			expect(o.scrollWidth, `People at ${w} px scrolls the page sideways: ${o.culprits.join(' | ')}`).toBeLessThanOrEqual(o.innerWidth);
			const box = await page.getByTestId('people-table').evaluate((t) => ({ client: t.parentElement!.clientWidth, scroll: t.parentElement!.scrollWidth }));
			expect(box.scroll, `People at ${w} px scrolls sideways inside its box`).toBeLessThanOrEqual(box.client);
			const outside = await peopleOutsideCells(page);
			expect(outside, `at ${w} px:\n${outside.join('\n')}`).toEqual([]);

			const words = await peopleWords(page);
			const show = (x: PeopleWord) => `"${x.word}" on ${x.lines} lines (${Math.round(x.width)} px wide, its column ${Math.round(x.room)} px) in ${x.email}`;
			// the demo accounts' names and addresses are ordinary words ("Rita Castellanos",
			// "rita.reviewer@demo.crosstally.test"): none is drawn on two lines
			const ordinary = words.filter((x) => seeded.has(x.email));
			expect(
				ordinary.map((x) => x.word),
				`at ${w}`
			).toEqual(expect.arrayContaining(['Castellanos', '.reviewer@', '.crosstally']));
			const splitOrdinary = ordinary.filter((x) => x.lines > 1);
			expect(splitOrdinary.map(show), `People at ${w} px splits ordinary words`).toEqual([]);
			// any word, the suite's long ones included, is broken only when it is wider than its column
			// (the last resort: '=HYPERLINK("http://x.test","Odd")' at 768 px)
			const splitThatFit = words.filter((x) => x.lines > 1 && x.width <= x.room + 0.5);
			expect(splitThatFit.map(show), `People at ${w} px splits words that fit their column`).toEqual([]);
		}
		// the roles form (a checkbox per role, Save, Cancel) fits the Roles column at its narrowest
		await page.setViewportSize({ width: 768, height: 900 });
		await page.getByRole('button', { name: 'Change roles of Rita Castellanos' }).click();
		await expect.poll(() => page.getByTestId('people-table').locator('form[action="?/roles"]').count()).toBe(1);
		const editing = await peopleOutsideCells(page);
		expect(editing, `the roles form at 768 px:\n${editing.join('\n')}`).toEqual([]);
		await page.context().close();
	}, 120_000);

	it('Review puts the record form under the discrepancy cards below 1280 px, beside them from 1280 px', async () => {
		const page = await as('reviewer');
		for (const w of [...WIDTHS, 1280]) {
			await page.setViewportSize({ width: w, height: 900 });
			await page.goto(`${BASE_URL}/protocols/${ids.review}/review`);
			const list = (await page.getByTestId('discrepancies').boundingBox())!;
			const form = (await page.getByRole('complementary', { name: 'Scanned record form' }).boundingBox())!;
			if (w < 1280) expect(form.y, `at ${w}`).toBeGreaterThanOrEqual(list.y + list.height);
			else expect(form.x, `at ${w}`).toBeGreaterThanOrEqual(list.x + list.width);
		}
		await page.context().close();
	}, 120_000);
});

describe('Audit charts at every width', () => {
	it('draw their text at the page type size (12 px, not scaled), keep it inside the chart, and keep the axis titles', async () => {
		const page = await as('lead');
		await page.goto(`${BASE_URL}/audit`, { waitUntil: 'networkidle' });
		for (const w of WIDTHS) {
			await page.setViewportSize({ width: w, height: 900 });
			await page.waitForFunction(() => !document.querySelector('[aria-busy="true"]'), undefined, { timeout: 30_000 });
			await settle(page);
			const charts = await page
				.locator('svg[role="img"][aria-labelledby^="forest"], svg[role="img"][aria-labelledby^="weekly"], svg[role="img"][aria-labelledby^="ba"]')
				.evaluateAll((svgs) =>
					svgs.map((svg) => {
						const box = svg.getBoundingClientRect();
						const texts = [...svg.querySelectorAll('text')].filter((t) => t.textContent?.trim());
						return {
							id: svg.getAttribute('aria-labelledby'),
							// one SVG unit is one CSS pixel: the drawing is not scaled
							scale: box.width / (svg as SVGSVGElement).viewBox.baseVal.width,
							sizes: [...new Set(texts.map((t) => getComputedStyle(t).fontSize))],
							outside: texts
								.filter((t) => {
									const b = t.getBoundingClientRect();
									return b.left < box.left - 0.5 || b.right > box.right + 0.5 || b.top < box.top - 0.5 || b.bottom > box.bottom + 0.5;
								})
								.map((t) => t.textContent),
							all: texts.map((t) => t.textContent ?? '').join(' | '),
							right: box.right
						};
					})
				);
			expect(charts.length, `at ${w}`).toBe(3);
			for (const c of charts) {
				expect(c.scale, `${c.id} at ${w}`).toBeCloseTo(1, 2);
				expect(c.sizes, `${c.id} at ${w}`).toEqual(['12px']);
				expect(c.outside, `${c.id} at ${w}: text outside the chart`).toEqual([]);
				expect(c.right, `${c.id} at ${w}`).toBeLessThanOrEqual(w);
			}
			const all = charts.map((c) => c.all).join(' ');
			for (const title of [
				'Errors per 100 fields entered (dot)',
				'Week starting (Monday, ISO 8601 weeks',
				'Errors per 100 fields',
				'Mean of the two entries',
				'First − second'
			])
				expect(all, `at ${w}`).toContain(title);
		}
		await page.context().close();
	}, 180_000);
});

describe('Summary at every width', () => {
	it('on a phone the score table is one block per test with label/value pairs and nothing scrolls sideways; from 1024 px it is a table', async () => {
		const page = await as('reviewer');
		await page.goto(`${BASE_URL}/protocols/${ids.verified}/summary`, { waitUntil: 'load' });
		for (const w of WIDTHS) {
			await page.setViewportSize({ width: w, height: 900 });
			await settle(page);
			const table = page.getByTestId('summary-table');
			const row = table.locator('tbody tr[data-test]').first();
			expect(await row.evaluate((e) => getComputedStyle(e).display), `at ${w}`).toBe(w < 1024 ? 'grid' : 'table-row');
			// no box on the page scrolls sideways (a table in an overflow box would)
			const scrollers = await page.evaluate(() =>
				[...document.querySelectorAll('main *')]
					.filter((e) => ['auto', 'scroll'].includes(getComputedStyle(e).overflowX) && e.scrollWidth > e.clientWidth + 1)
					.map((e) => `${e.tagName.toLowerCase()}.${String(e.className).slice(0, 40)} ${e.scrollWidth}>${e.clientWidth}`)
			);
			expect(scrollers, `at ${w}`).toEqual([]);
			if (w < 1024) {
				// each value carries its column's name, as the header row would give it
				const labels = await row
					.locator('td')
					.evaluateAll((tds) => tds.filter((td) => getComputedStyle(td).display !== 'none').map((td) => getComputedStyle(td, '::before').content));
				expect(labels, `at ${w}`).toEqual(expect.arrayContaining(['"Raw score"', '"Percentile"', '"Descriptive label"', '"95% CI"', '"Norm group"']));
				const right = await table.locator('tbody tr').evaluateAll((rs) => Math.max(...rs.map((r) => r.getBoundingClientRect().right)));
				expect(right, `at ${w}`).toBeLessThanOrEqual(w);
			}
		}
		// a summary with composites: on a phone every shown value of every row, composites' too, names its column
		await page.goto(`${BASE_URL}/protocols/${ids.twVerified}/summary`, { waitUntil: 'load' });
		await page.setViewportSize({ width: 390, height: 900 });
		await settle(page);
		const unlabelled = await page
			.getByTestId('summary-table')
			.locator('tbody tr[data-test], tbody tr[data-composite]')
			.evaluateAll((rows) =>
				rows.flatMap((r) =>
					[...r.querySelectorAll(':scope > td:not(.test-col)')]
						.filter((td) => getComputedStyle(td).display !== 'none' && ['none', 'normal', ''].includes(getComputedStyle(td, '::before').content))
						.map((td) => `${r.getAttribute('data-test') ?? r.getAttribute('data-composite')}: ${td.textContent?.trim()}`)
				)
			);
		expect(unlabelled).toEqual([]);
		expect(await page.getByTestId('summary-table').locator('tbody tr[data-composite]').count()).toBeGreaterThan(0);
		// print keeps the table whatever the window's width (the stacking is for the screen only)
		await page.goto(`${BASE_URL}/protocols/${ids.verified}/summary`, { waitUntil: 'load' });
		await page.setViewportSize({ width: 390, height: 900 });
		await page.emulateMedia({ media: 'print' });
		expect(
			await page
				.getByTestId('summary-table')
				.locator('tbody tr[data-test]')
				.first()
				.evaluate((e) => getComputedStyle(e).display)
		).toBe('table-row');
		await page.emulateMedia({ media: 'screen' });
		await page.context().close();
	}, 120_000);

	it('the bell curve draws its text at the page type size (12 px, not scaled), inside the chart, with every scale named, at every width', async () => {
		const page = await as('reviewer');
		await page.goto(`${BASE_URL}/protocols/${ids.verified}/summary`, { waitUntil: 'load' });
		for (const w of WIDTHS) {
			await page.setViewportSize({ width: w, height: 900 });
			await settle(page);
			const c = await page.getByTestId('bell-curve').evaluate((svg) => {
				const box = svg.getBoundingClientRect();
				const texts = [...svg.querySelectorAll('text')].filter((t) => t.textContent?.trim());
				const boxes = texts.map((t) => ({ text: t.textContent ?? '', b: t.getBoundingClientRect() }));
				return {
					scale: box.width / (svg as SVGSVGElement).viewBox.baseVal.width,
					sizes: [...new Set(texts.map((t) => getComputedStyle(t).fontSize))],
					outside: boxes
						.filter(({ b }) => b.left < box.left - 0.5 || b.right > box.right + 0.5 || b.top < box.top - 0.5 || b.bottom > box.bottom + 0.5)
						.map((x) => x.text),
					// labels drawn over each other are as unreadable as clipped ones
					overlaps: boxes.flatMap((a, i) =>
						boxes
							.slice(i + 1)
							.filter((b) => a.b.left < b.b.right - 1 && b.b.left < a.b.right - 1 && a.b.top < b.b.bottom - 1 && b.b.top < a.b.bottom - 1)
							.map((b) => `${a.text} / ${b.text}`)
					),
					all: boxes.map((x) => x.text),
					right: box.right
				};
			});
			expect(c.scale, `at ${w}`).toBeCloseTo(1, 2);
			expect(c.sizes, `at ${w}`).toEqual(['12px']);
			expect(c.outside, `at ${w}: text outside the chart`).toEqual([]);
			expect(c.overlaps, `at ${w}: text over text`).toEqual([]);
			expect(c.right, `at ${w}`).toBeLessThanOrEqual(w);
			// the axis titles: one row per scale
			for (const title of ['z-score', 'Standard', 'Scaled', 'T-score', 'Percentile']) expect(c.all, `at ${w}`).toContain(title);
			// the band names: in the curve where there is room, else in the legend under it
			const legend = page.getByTestId('bell-legend');
			const bandText = c.all.join(' ') + ((await legend.count()) ? await legend.innerText() : '');
			for (const band of ['Exceptionally', 'Below', 'Low', 'Average', 'High', 'Above']) expect(bandText, `at ${w}`).toContain(band);
		}
		await page.context().close();
	}, 120_000);
});

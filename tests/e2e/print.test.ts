/**
 * The Summary printed from Chromium (page.pdf(), the print path of the browser's own Print) on A4
 * and on Letter, then read back with poppler (pdftotext for the words, pdftoppm for the pixels):
 *   - two pages for a 14-test battery: the score page (facts, caution, the whole table, its notes)
 *     and the bell curve's own page (design target of this layout, not a value read from the app);
 *   - every column header of the table is on the score page;
 *   - the examinee code and "Page n of N" are on every page (CSS @page margin boxes);
 *   - nothing is wider than the printable area: element boxes in print emulation at the printable
 *     width, and the right margin of every rendered page is blank paper;
 *   - a table stretched over several pages repeats its header row on each, and no domain heading
 *     is left at a page foot without a test of its own under it.
 * The PNG pages are kept in test-results/print/ to look at.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdirSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { launch, signIn, BASE_URL } from '../helpers/browser';
import { ACCOUNTS, DEMO_PASSWORD, signedIn } from '../helpers/http';
import { throughWorkflow, uniqueCode } from '../helpers/workflow';
import { tidewaterProtocol } from '../helpers/tidewater';
import { closeDb } from '../../src/lib/server/db';

const OUT = 'test-results/print';
const HEADERS = ['Test', 'Raw score', 'z-score', 'Standard score', 'Scaled score', 'T-score', 'Percentile', 'Descriptive label', '95% CI', 'Group'];
// the demo catalog's domains, each with its tests (db/seeds/catalog.ts, core-adult battery)
const DOMAINS: Record<string, string[]> = {
	Attention: ['Number Relay Span', 'Tone Vigil Omissions'],
	'Processing speed': ['Speeded Figure Match', 'Glyph Sort', 'Dot Chase'],
	Memory: ['Harbour Word Recall', 'Harbour Word Recall, Delayed', 'Lantern Figure Recall'],
	Language: ['Word Harvest', 'Object Label Match'],
	Visuospatial: ['Mosaic Assembly', 'Compass Angle Match'],
	'Executive function': ['Switching Rule Errors', 'Harbour Route Planning']
};
// paper and printable width: A4 210 mm, Letter 8.5 in = 215.9 mm; the page's margins are 12 mm left and right
const PAPERS = [
	{ format: 'A4' as const, widthMm: 210 },
	{ format: 'Letter' as const, widthMm: 215.9 }
];
const MARGIN_MM = 12;
const PX_PER_MM = 96 / 25.4;

let browser: Browser;
let page: Page;
let id: number;
let code: string;

beforeAll(async () => {
	mkdirSync(OUT, { recursive: true });
	browser = await launch();
	const c = { lead: await signedIn('lead'), first: await signedIn('scorer'), second: await signedIn('scorer2'), reviewer: await signedIn('reviewer') };
	code = uniqueCode('PR');
	id = await throughWorkflow(c, {
		first: ACCOUNTS.scorer,
		second: ACCOUNTS.scorer2,
		reviewer: ACCOUNTS.reviewer,
		battery: 'core-adult',
		code,
		birthDate: '1956-03-14',
		testDate: '2026-09-25',
		verify: true
	});
	page = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
	await signIn(page, ACCOUNTS.reviewer, DEMO_PASSWORD);
	await page.goto(`${BASE_URL}/protocols/${id}/summary`, { waitUntil: 'networkidle' });
}, 180_000);

afterAll(async () => {
	await browser?.close();
	await closeDb();
});

/** A PPM (P6) image from pdftoppm: width, height and RGB bytes. */
function readPpm(file: string) {
	const buf = readFileSync(file);
	const head = buf.subarray(0, 40).toString('latin1').split(/\s+/);
	const [w, h] = [Number(head[1]), Number(head[2])];
	const offset = buf.length - w * h * 3;
	return { w, h, px: (x: number, y: number) => buf.subarray(offset + (y * w + x) * 3, offset + (y * w + x) * 3 + 3) };
}

function pdfPages(pdf: string, name: string) {
	const info = execFileSync('pdfinfo', [pdf]).toString();
	const pages = Number(/Pages:\s+(\d+)/.exec(info)![1]);
	const text = Array.from({ length: pages }, (_, i) => execFileSync('pdftotext', ['-f', String(i + 1), '-l', String(i + 1), '-layout', pdf, '-']).toString());
	for (const f of readdirSync(OUT).filter((f) => f.startsWith(`${name}-`))) rmSync(join(OUT, f));
	execFileSync('pdftoppm', ['-r', '60', '-png', pdf, join(OUT, name)]);
	execFileSync('pdftoppm', ['-r', '60', pdf, join(OUT, `${name}-raw`)]);
	const images = readdirSync(OUT)
		.filter((f) => f.startsWith(`${name}-raw`) && f.endsWith('.ppm'))
		.sort()
		.map((f) => readPpm(join(OUT, f)));
	return { pages, text, images };
}

describe('the Summary printed', () => {
	for (const paper of PAPERS) {
		it(`on ${paper.format}: two pages, every column header, the examinee code and page number on every page, nothing past the printable width`, async () => {
			const pdf = join(OUT, `summary-${paper.format}.pdf`);
			await page.pdf({ path: pdf, format: paper.format });
			const { pages, text, images } = pdfPages(pdf, `summary-${paper.format}`);
			expect(pages).toBe(2);
			const flat = (t: string) => t.replace(/\s+/g, ' ');
			for (const h of HEADERS) expect(flat(text[0]), `header ${h}`).toContain(h);
			// (a long name may wrap inside its cell: its part before a comma is on one line)
			for (const tests of Object.values(DOMAINS)) for (const t of tests) expect(flat(text[0])).toContain(t.split(',')[0]);
			for (const [i, t] of text.entries()) {
				expect(t, `page ${i + 1}`).toContain(code);
				expect(flat(t), `page ${i + 1}`).toContain(`Page ${i + 1} of ${pages}`);
			}
			// the score page carries the report's facts and the caution
			for (const fact of [
				'Test date',
				'2026-09-25',
				'Age at testing',
				'70;6;11',
				'Harbourview Core Adult Battery',
				'Harbourview Adult Norms 2024',
				'AACN',
				'never replace'
			])
				expect(flat(text[0])).toContain(fact);
			// † explained where a percentile was recomputed (Dot Chase does not report one)
			expect(flat(text[0])).toContain('† Percentile recomputed');
			// the bell curve has the second page
			expect(flat(text[1])).toContain('On the normal curve');
			// the right margin (12 mm, less 2 mm for anti-aliasing) is blank paper on every page
			for (const [i, img] of images.entries()) {
				const from = Math.ceil(img.w * (1 - (MARGIN_MM - 2) / paper.widthMm));
				let ink = 0;
				for (let y = 0; y < img.h; y++)
					for (let x = from; x < img.w; x++) {
						const [r, g, b] = img.px(x, y);
						if (r < 235 || g < 235 || b < 235) ink++;
					}
				expect(ink, `page ${i + 1}: pixels with ink in the right margin`).toBe(0);
			}
		}, 120_000);

		it(`on ${paper.format}: in print emulation at the printable width, no element is wider than the page`, async () => {
			const printable = Math.floor((paper.widthMm - 2 * MARGIN_MM) * PX_PER_MM);
			const p = await (await browser.newContext({ viewport: { width: printable, height: 1000 } })).newPage();
			await signIn(p, ACCOUNTS.reviewer, DEMO_PASSWORD);
			await p.goto(`${BASE_URL}/protocols/${id}/summary`, { waitUntil: 'networkidle' });
			await p.emulateMedia({ media: 'print' });
			const over = await p.evaluate(
				`[...document.querySelectorAll('body *')].filter((e) => e.getBoundingClientRect().width > 0 && e.getBoundingClientRect().right > ${printable} + 0.5).map((e) => e.tagName + '.' + e.className + ' ' + Math.round(e.getBoundingClientRect().right))`
			);
			expect(over).toEqual([]);
			const table = (await p.getByTestId('summary-table').boundingBox())!;
			// full width: the table spans the printable width
			expect(table.width).toBeGreaterThan(printable - 2);
			// no test name broken one word per line: the name column is at least 36 mm
			const nameCol = (await p.locator('tr[data-test] td.test-col').first().boundingBox())!;
			expect(nameCol.width).toBeGreaterThanOrEqual(36 * PX_PER_MM - 1);
			expect(await p.locator('nav, [data-testid="top-bar"]').evaluateAll((es) => es.every((e) => getComputedStyle(e).display === 'none'))).toBe(true);
			await p.context().close();
		}, 120_000);
	}

	it('a table longer than a page repeats its header row on every page and leaves no domain heading alone at a page foot', async () => {
		const p = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
		await signIn(p, ACCOUNTS.reviewer, DEMO_PASSWORD);
		await p.goto(`${BASE_URL}/protocols/${id}/summary`, { waitUntil: 'networkidle' });
		// stretch every row (only the rows' height; the page's own print rules decide the breaks)
		await p.addStyleTag({ content: '@media print { .summary-table tr[data-test] td { padding-top: 9mm !important; padding-bottom: 9mm !important; } }' });
		const pdf = join(OUT, 'summary-long-A4.pdf');
		await p.pdf({ path: pdf, format: 'A4' });
		const { pages, text } = pdfPages(pdf, 'summary-long-A4');
		const bellAt = text.findIndex((t) => t.includes('On the normal curve'));
		// pages before the bell curve's that hold table rows (the table's notes may run onto a page of their own)
		const tablePages = text.slice(0, bellAt).filter((t) =>
			Object.values(DOMAINS)
				.flat()
				.some((n) => t.includes(n))
		);
		expect(tablePages.length).toBeGreaterThanOrEqual(2);
		for (const [i, t] of tablePages.entries()) {
			expect(t.replace(/\s+/g, ' '), `table page ${i + 1}: header row`).toContain('Raw score');
			expect(t, `table page ${i + 1}`).toContain(code);
			// every domain heading on this page has at least one of its own tests after it on the same page
			for (const [domain, tests] of Object.entries(DOMAINS)) {
				const at = t.search(new RegExp(`^\\s*${domain}\\s*$`, 'm'));
				if (at < 0) continue;
				expect(
					tests.some((n) => t.indexOf(n, at) > at),
					`table page ${i + 1}: "${domain}" alone at the foot`
				).toBe(true);
			}
		}
		expect(pages).toBeGreaterThan(2);
		await p.context().close();
	}, 120_000);

	it('a battery with composites (Tidewater) prints them first, before the first domain, and the band test’s note beside the curve; nothing in the right margin', async () => {
		const c = { lead: await signedIn('lead'), first: await signedIn('scorer'), second: await signedIn('scorer2'), reviewer: await signedIn('reviewer') };
		const twCode = uniqueCode('PRTW');
		const tw = await tidewaterProtocol(c, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, code: twCode }, { verify: true });
		const p = await (await browser.newContext({ viewport: { width: 1280, height: 900 } })).newPage();
		await signIn(p, ACCOUNTS.reviewer, DEMO_PASSWORD);
		await p.goto(`${BASE_URL}/protocols/${tw}/summary`, { waitUntil: 'networkidle' });
		const pdf = join(OUT, 'summary-composites-A4.pdf');
		await p.pdf({ path: pdf, format: 'A4' });
		const { pages, text, images } = pdfPages(pdf, 'summary-composites-A4');
		const flat = text.map((t) => t.replace(/\s+/g, ' '));
		const all = flat.join(' ');
		// the composites' heading and both composites come before the domains' tests (the parts' names also appear in
		// the composites' rows, so the check uses a domain heading and a test that is part of no composite)
		const first = Math.min(all.indexOf('Visuospatial'), all.indexOf('Category Naming'));
		expect(all.indexOf('Composites')).toBeGreaterThan(0);
		expect(all.indexOf('Composites')).toBeLessThan(all.indexOf('Memory Index'));
		expect(all.indexOf('Memory Index')).toBeLessThan(all.indexOf('Visuomotor Index'));
		expect(all.indexOf('Visuomotor Index')).toBeLessThan(first);
		// the sum of the parts: 13 + 14 = 27 (tests/helpers/tidewater.ts)
		expect(all).toContain('Σ 27');
		expect(all).toContain('Not on the curve: Beacon Watch False Alarms.');
		for (const [i, t] of text.entries()) expect(t, `page ${i + 1}`).toContain(twCode);
		expect(pages).toBeGreaterThanOrEqual(2);
		for (const [i, img] of images.entries()) {
			const from = Math.ceil(img.w * (1 - (MARGIN_MM - 2) / 210));
			let ink = 0;
			for (let y = 0; y < img.h; y++)
				for (let x = from; x < img.w; x++) {
					const [r, g, b] = img.px(x, y);
					if (r < 235 || g < 235 || b < 235) ink++;
				}
			expect(ink, `page ${i + 1}: pixels with ink in the right margin`).toBe(0);
		}
		// screen and print emulation at a desktop and a phone width, to look at (test-results/print/)
		for (const w of [1440, 390]) {
			await p.setViewportSize({ width: w, height: 900 });
			await p.emulateMedia({ media: 'screen' });
			await p.screenshot({ path: join(OUT, `summary-composites-screen-${w}.png`), fullPage: true });
			await p.emulateMedia({ media: 'print' });
			await p.screenshot({ path: join(OUT, `summary-composites-print-${w}.png`), fullPage: true });
		}
		await p.context().close();
	}, 180_000);
});

/**
 * `npm run bench:pages` — what the browser gets, in Chromium (playwright-core, /usr/bin/chromium):
 *   - JavaScript shipped per page, gzip bytes: every script the page fetched while loading (the
 *     built files as served; each gzipped here at level 9 like adapter-node's precompressed .gz),
 *     for Entry, Review, Summary and Audit. Goal: Entry < 100 KB gzip.
 *   - Entry with 60 fields (a battery of 12 tests × raw + 4 derived scores): time to interactive
 *     (navigation start → hydrated, the first field focused by the page), and keystroke-to-next-field
 *     latency: a digit typed, then Enter → focus on the next input (in the same task) and → the
 *     next frame painted. Median and p95 over the 59 moves.
 *   - Layout shift while fonts load (CLS from PerformanceObserver), per page.
 * The floor for TTI is the sign-in page's time to interactive in the same browser.
 * Options: --runs N (TTI runs, default 5), --out PATH.
 */
import { gzipSync } from 'node:zlib';
import { arg, baseUrl, emit, loadBenchEnv, machine, median, pct, r1, r2 } from './lib';

loadBenchEnv('pages');
const { chromium } = await import('playwright-core');
const { closeDb } = await import('../../src/lib/server/db');
const { closeRedis } = await import('../../src/lib/server/redis'); // fixtures' writes wake the mail dispatcher (mail/wake.ts)
const F = await import('./fixtures');

const BASE = baseUrl();
const RUNS = Number(arg('runs', '5'));
const log = (s: string) => console.error(`[bench:pages] ${s}`);

async function main() {
	const env = machine();
	const battery = await F.ensure60FieldBattery();
	const [entry] = await F.makeProtocols({ n: 1, batteryCode: battery, second: F.EMAILS.second, reconcile: false, prefix: 'BP-E' });
	const [reviewed] = await F.makeProtocols({ n: 1, second: F.EMAILS.second2, reconcile: true, slips: 4, prefix: 'BP-R' });
	// Entry: the second scorer's pass of a 60-field protocol (their draft is saved, not submitted)
	const browser = await chromium.launch({
		executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
		headless: true,
		args: [
			'--headless',
			'--no-sandbox',
			'--disable-gpu',
			'--disable-quic',
			'--disable-background-networking',
			'--disable-component-update',
			'--disable-sync',
			'--no-first-run'
		]
	});
	const contextFor = async (email: string) => {
		const ctx = await browser.newContext({ viewport: { width: 1280, height: 900 }, bypassCSP: true });
		const page = await ctx.newPage();
		await page.goto(`${BASE}/signin`);
		await page.fill('#email', email);
		await page.fill('#password', F.PASSWORD);
		await Promise.all([page.waitForURL((u) => !u.pathname.startsWith('/signin')), page.click('button[type=submit]')]);
		await page.close();
		return ctx;
	};
	const scorer = await contextFor(F.EMAILS.second);
	const reviewer = await contextFor(F.EMAILS.reviewer);
	const lead = await contextFor(F.EMAILS.lead);
	// bypassCSP only so that the page's CSP does not refuse the measuring scripts (Playwright evaluates strings)
	const clsScript = `window.__cls = 0; window.__shifts = []; new PerformanceObserver((l) => { for (const e of l.getEntries()) if (!e.hadRecentInput) { window.__cls += e.value; window.__shifts.push({ at: Math.round(e.startTime), value: Number(e.value.toFixed(4)), nodes: (e.sources || []).map((s) => s.node ? (s.node.id || s.node.nodeName + '.' + String(s.node.className).slice(0, 40)) : '?') }); } }).observe({ type: 'layout-shift', buffered: true });`;

	/** Load a page in a fresh tab (cold cache): JS bytes, CLS after fonts settle, timings. */
	async function load(ctx: typeof scorer, path: string, ready: string) {
		const page = await ctx.newPage();
		const cdp = await ctx.newCDPSession(page);
		await cdp.send('Network.enable');
		await cdp.send('Network.setCacheDisabled', { cacheDisabled: true });
		await page.addInitScript(clsScript);
		const scripts = new Map<string, Promise<number>>();
		page.on('response', (res) => {
			if (res.request().resourceType() === 'script' || /\.m?js(\?|$)/.test(res.url())) {
				scripts.set(
					res.url(),
					res.body().then(
						(b) => gzipSync(b, { level: 9 }).length,
						() => 0
					)
				);
			}
		});
		await page.goto(BASE + path, { waitUntil: 'commit' });
		await page.waitForFunction(ready, undefined, { timeout: 20_000 });
		const tti = await page.evaluate(() => performance.now());
		await page.waitForLoadState('networkidle');
		await page.evaluate(() => document.fonts.ready);
		await page.waitForTimeout(300);
		const cls = (await page.evaluate('window.__cls')) as number;
		const shifts = (await page.evaluate('window.__shifts')) as unknown[];
		if (cls > 0.01) log(`${path}: layout shifts ${JSON.stringify(shifts)}`);
		const sizes = await Promise.all(scripts.values());
		const fonts = (await page.evaluate(() =>
			performance
				.getEntriesByType('resource')
				.filter((e) => /\.woff2?$/.test(e.name))
				.map((e) => e.name.split('/').pop())
		)) as string[];
		return { page, tti, cls, jsGzip: sizes.reduce((a, b) => a + b, 0), jsFiles: sizes.length, fonts };
	}

	const pages = [
		{
			name: 'Entry (60 fields)',
			ctx: scorer,
			path: `/protocols/${entry.id}/entry`,
			ready: `document.activeElement && document.activeElement.tagName === 'INPUT'`
		},
		{ name: 'Review', ctx: reviewer, path: `/protocols/${reviewed.id}/review`, ready: `document.readyState === 'complete'` },
		{ name: 'Summary', ctx: reviewer, path: `/protocols/${reviewed.id}/summary`, ready: `document.readyState === 'complete'` },
		{ name: 'Audit', ctx: lead, path: `/audit`, ready: `document.readyState === 'complete'` },
		{
			name: 'Sign-in (floor)',
			ctx: await browser.newContext({ viewport: { width: 1280, height: 900 }, bypassCSP: true }),
			path: `/signin`,
			ready: `document.activeElement && document.activeElement.id === 'email' && document.readyState === 'complete'`
		}
	];
	const rows: Array<{ page: string; js_gzip_bytes: number; js_files: number; cls: number; tti_ms: number; fonts: string[] }> = [];
	for (const p of pages) {
		const ttis: number[] = [];
		let first: Awaited<ReturnType<typeof load>> | null = null;
		for (let i = 0; i < (p.name.startsWith('Entry') || p.name.startsWith('Sign') ? RUNS : 1); i++) {
			const r = await load(p.ctx, p.path, p.ready);
			ttis.push(r.tti);
			if (!first) first = r;
			else await r.page.close();
		}
		await first!.page.close();
		rows.push({
			page: p.name,
			js_gzip_bytes: first!.jsGzip,
			js_files: first!.jsFiles,
			cls: Number(first!.cls.toFixed(4)),
			tti_ms: r1(median(ttis)),
			fonts: first!.fonts
		});
		log(`${p.name}: ${(first!.jsGzip / 1024).toFixed(1)} KB gzip in ${first!.jsFiles} files, CLS ${first!.cls.toFixed(4)}, ready ${r1(median(ttis))} ms`);
	}

	// keystroke → next field on Entry
	const page = await scorer.newPage();
	await page.goto(`${BASE}/protocols/${entry.id}/entry`);
	await page.waitForFunction(pages[0].ready);
	const ids = (await page.$$eval('form input[id^="f-"]', (els) => els.map((e) => e.id))) as string[];
	await page.evaluate(() => {
		const w = window as unknown as { __k: number; __moves: Array<{ sync: number; frame: number }> };
		w.__moves = [];
		window.addEventListener(
			'keydown',
			(e) => {
				if (e.key === 'Enter') w.__k = performance.now();
			},
			true
		);
		window.addEventListener('focusin', () => {
			if (!w.__k) return;
			const sync = performance.now() - w.__k;
			const k = w.__k;
			w.__k = 0;
			requestAnimationFrame(() => setTimeout(() => w.__moves.push({ sync, frame: performance.now() - k }), 0));
		});
	});
	await page.focus(`#${ids[0]}`);
	for (let i = 0; i < ids.length - 1; i++) {
		await page.keyboard.type(String((i % 9) + 1));
		await page.keyboard.press('Enter');
		await page.waitForFunction((id) => document.activeElement?.id === id, ids[i + 1]);
	}
	await page.waitForTimeout(100);
	const moves = (await page.evaluate('window.__moves')) as Array<{ sync: number; frame: number }>;
	await page.close();
	await browser.close();

	const entryRow = rows[0];
	const floor = rows.find((r) => r.page.startsWith('Sign-in'))!;
	const keystroke = {
		fields: ids.length,
		moves: moves.length,
		focus_median_ms: r2(median(moves.map((m) => m.sync))),
		focus_p95_ms: r2(
			pct(
				moves.map((m) => m.sync),
				95
			)
		),
		frame_median_ms: r2(median(moves.map((m) => m.frame))),
		frame_p95_ms: r2(
			pct(
				moves.map((m) => m.frame),
				95
			)
		)
	};
	console.log(`\nPages in Chromium, ${env.cores} cores, ${env.date.slice(0, 10)}`);
	console.log(`${'page'.padEnd(20)}${'JS gzip KB'.padStart(11)}${'files'.padStart(7)}${'CLS'.padStart(8)}${'ready ms'.padStart(10)}`);
	for (const r of rows)
		console.log(
			`${r.page.padEnd(20)}${(r.js_gzip_bytes / 1024).toFixed(1).padStart(11)}${String(r.js_files).padStart(7)}${r.cls.toFixed(3).padStart(8)}${r.tti_ms.toFixed(0).padStart(10)}`
		);
	console.log(
		`Entry JS: ${(entryRow.js_gzip_bytes / 1024).toFixed(1)} KB gzip (goal < 100 KB: ${entryRow.js_gzip_bytes < 100 * 1024 ? 'met' : 'NOT met'}); TTI ${entryRow.tti_ms} ms = ${r2(entryRow.tti_ms / floor.tti_ms)} × sign-in`
	);
	console.log(
		`Enter → next field (${keystroke.fields} fields): focus median ${keystroke.focus_median_ms} ms (p95 ${keystroke.focus_p95_ms}), next frame median ${keystroke.frame_median_ms} ms (p95 ${keystroke.frame_p95_ms})`
	);
	emit('pages', {
		...env,
		pages: rows,
		entry: {
			js_gzip_kb: r1(entryRow.js_gzip_bytes / 1024),
			goal_kb: 100,
			met: entryRow.js_gzip_bytes < 100 * 1024,
			tti_ms: entryRow.tti_ms,
			floor_tti_ms: floor.tti_ms,
			tti_ratio: r2(entryRow.tti_ms / floor.tti_ms),
			cls: entryRow.cls
		},
		keystroke
	});
}

main()
	.catch((e) => {
		console.error(`[bench:pages] ${e instanceof Error ? e.stack : e}`);
		process.exitCode = 1;
	})
	.finally(() => Promise.all([closeDb(), closeRedis()]));

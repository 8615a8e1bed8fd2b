/** Launching Debian's Chromium through playwright-core, for end-to-end tests and screenshots. */
import { chromium, type Browser, type Page } from 'playwright-core';

export const BASE_URL = process.env.ORIGIN ?? 'http://localhost:3010';

export async function launch(): Promise<Browser> {
	return chromium.launch({
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
}

export async function signIn(page: Page, email: string, password: string, base = BASE_URL): Promise<void> {
	// Typing before the page's script has run is fine: the fields keep what was typed through
	// hydration (tests/e2e/early-typing.test.ts). Until that was fixed the e-mail was now and then
	// emptied under a fast test, the browser's "required" check stopped the submit without a request,
	// and a sign-in seemed to hang for 45 s.
	await page.goto(`${base}/signin`);
	await page.fill('#email', email);
	await page.fill('#password', password);
	await page.click('button[type=submit]');
	// Either we leave the sign-in page, or it shows why not. 'commit' = the next document has
	// started to arrive; then wait for its DOM (not for every subresource to finish loading).
	try {
		await Promise.race([
			page.waitForURL((u) => !u.pathname.startsWith('/signin'), { waitUntil: 'commit', timeout: 30_000 }),
			page.getByTestId('signin-error').waitFor({ timeout: 30_000 })
		]);
	} catch (e) {
		const title = await page.title().catch(() => '?');
		const typed = await page.inputValue('#email').catch(() => '?');
		throw new Error(`sign-in as ${email} did not finish: at ${page.url()} ("${title}"), e-mail field holds "${typed}": ${e instanceof Error ? e.message : e}`, {
			cause: e
		});
	}
	await page.waitForLoadState('domcontentloaded');
}

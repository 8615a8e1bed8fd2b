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
	// KNOWN ISSUE (session 6, not yet explained): now and then the server did not answer the sign-in
	// POST for 45 s, with no error logged. Until it is found, a first attempt that neither leaves the
	// page nor shows an error in 20 s is logged and tried once more, so one stall does not fail an
	// unrelated layout test; a second stall still fails.
	for (let attempt = 1; ; attempt++) {
		await page.goto(`${base}/signin`);
		await page.fill('#email', email);
		await page.fill('#password', password);
		await page.click('button[type=submit]');
		// Either we leave the sign-in page, or it shows why not. 'commit' = the next document has
		// started to arrive; then wait for its DOM (not for every subresource to finish loading).
		const timeout = attempt === 1 ? 20_000 : 45_000;
		try {
			await Promise.race([
				page.waitForURL((u) => !u.pathname.startsWith('/signin'), { waitUntil: 'commit', timeout }),
				page.getByTestId('signin-error').waitFor({ timeout })
			]);
			await page.waitForLoadState('domcontentloaded');
			return;
		} catch (e) {
			const title = await page.title().catch(() => '?');
			const message = `sign-in as ${email} did not finish: at ${page.url()} ("${title}"): ${e instanceof Error ? e.message : e}`;
			if (attempt === 1) {
				console.error(`[e2e] KNOWN ISSUE, retrying once: ${message}`);
				continue;
			}
			throw new Error(message, { cause: e });
		}
	}
}

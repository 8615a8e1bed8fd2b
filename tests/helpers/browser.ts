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
	await page.goto(`${base}/signin`);
	await page.fill('#email', email);
	await page.fill('#password', password);
	await page.click('button[type=submit]');
	// Either we leave the sign-in page, or it shows why not.
	await Promise.race([
		page.waitForURL((u) => !u.pathname.startsWith('/signin')),
		page.getByTestId('signin-error').waitFor()
	]);
}

/**
 * The Mailbox lists the catch a page at a time (50, newest first): a full test run leaves thousands
 * of caught messages, and one page holding them all took minutes to load and check (issue 15: the
 * width test's admin screens timed out). Messages are sent straight to the mail fake over SMTP.
 */
import { describe, expect, it } from 'vitest';
import { createTransport } from 'nodemailer';
import { MAILFAKE_URL, signedIn } from '../helpers/http';

const smtpPort = Number(process.env.SMTP_PORT ?? 2535);

async function total(): Promise<number> {
	const res = await fetch(`${MAILFAKE_URL}/messages?summary=1&limit=0`);
	return Number(res.headers.get('x-total-count'));
}

describe('Mailbox pages', () => {
	it('shows 50 messages per page, newest first, with the range and links to older and newer pages', async () => {
		const tag = `page-${Date.now()}`;
		const smtp = createTransport({ host: '127.0.0.1', port: smtpPort, secure: false, ignoreTLS: true });
		for (let i = 1; i <= 51; i++) await smtp.sendMail({ from: 'test@clinic.test', to: 'mailbox-page@clinic.test', subject: `${tag} message ${i}`, text: 'x' });
		smtp.close();
		const n = await total();
		expect(n).toBeGreaterThanOrEqual(51);
		const admin = await signedIn('admin');

		const first = await (await admin.get('/mailbox')).text();
		const links = (html: string) => [...html.matchAll(/<a href="\/mailbox\/[\w-]+">([^<]*)<\/a>/g)].map((m) => m[1]);
		expect(links(first)).toHaveLength(50);
		expect(first).toMatch(/Messages 1–50 of (\d+), newest first/);
		expect(Number(first.match(/Messages 1–50 of (\d+)/)![1])).toBeGreaterThanOrEqual(51);
		expect(first).toContain('href="/mailbox?page=2"');
		expect(first).not.toContain('href="/mailbox?page=0"');
		const second = await (await admin.get('/mailbox?page=2')).text();
		expect(second).toMatch(/Messages 51–\d+ of \d+, newest first/);
		expect(second).toContain('href="/mailbox?page=1"');
		// newest first across the pages: this test's 51 messages, last sent first (other mail may arrive in between)
		const ours = [...links(first), ...links(second)].filter((t) => t.startsWith(tag));
		expect(ours).toEqual(Array.from({ length: 51 }, (_, i) => `${tag} message ${51 - i}`));

		for (const bad of ['0', '-1', 'abc', '1.5']) {
			const r = await admin.get(`/mailbox?page=${bad}`);
			expect(r.status, bad).toBe(400);
			expect(await r.text(), bad).toMatch(new RegExp(`page: (&quot;|")${bad.replace('.', '\\.')}(&quot;|") is not a page number`));
		}
	});
});

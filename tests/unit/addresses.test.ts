/**
 * E-mail addresses on People and in the Mailbox (walk-through findings): an address wraps after its
 * "@" first (its local part and its domain are each an inline-block, with a <wbr> between them), then
 * before a dot inside a part longer than its line (a <wbr> before each "."), and anywhere only when a
 * piece is still longer than its line (`overflow-wrap: anywhere`), not mid-name as `break-all` let it
 * ("ada.admi|n@dem|o…"); how it wraps in a browser is tests/e2e/widths.test.ts; the Mailbox's cc sits on a
 * line of its own with a space after "cc" (Svelte drops the space at the start of an element, which
 * ran "· cc" into the address before it).
 */
import { describe, it, expect } from 'vitest';
import { render } from 'svelte/server';
import EmailAddress from '../../src/lib/components/EmailAddress.svelte';
import Mailbox from '../../src/routes/mailbox/+page.svelte';

const strip = (html: string) => html.replace(/<!--[^]*?-->/g, '');

describe('EmailAddress', () => {
	it('offers a break after the @ (between two inline-blocks), before each dot inside a part, and after each comma of a list', () => {
		const part = (html: string) => `<span class="inline-block max-w-full">${html}</span>`;
		expect(strip(render(EmailAddress, { props: { address: 'rita.reviewer@demo.crosstally.test' } }).body)).toBe(
			`<span class="[overflow-wrap:anywhere]">${part('rita<wbr/>.reviewer@')}<wbr/>${part('demo<wbr/>.crosstally<wbr/>.test')}</span>`
		);
		expect(strip(render(EmailAddress, { props: { address: 'a@x.test, b@y.test' } }).body)).toBe(
			`<span class="[overflow-wrap:anywhere]">${part('a@')}<wbr/>${part('x<wbr/>.test')}, ${part('b@')}<wbr/>${part('y<wbr/>.test')}</span>`
		);
		// no "@": one part, still broken before its dots
		expect(strip(render(EmailAddress, { props: { address: 'not.an.address' } }).body)).toBe(
			`<span class="[overflow-wrap:anywhere]">${part('not<wbr/>.an<wbr/>.address')}</span>`
		);
	});
});

describe('the Mailbox list', () => {
	it('puts cc on its own line, "cc" then a space then the address', () => {
		const data = {
			messages: [{ id: 'm1', receivedAt: '2026-01-05T10:00:00Z', to: 'rita@clinic.test', cc: 'lee@clinic.test', subject: 'Reminder', from: 'x@clinic.test' }],
			total: 1,
			page: 1,
			perPage: 50,
			down: false,
			timeZone: 'UTC'
		};
		const html = strip(render(Mailbox, { props: { data } as never }).body);
		const text = html.replace(/<[^>]+>/g, '');
		expect(text).toContain('rita@clinic.testcc lee@clinic.test'); // two blocks: the address, then the cc line
		expect(html).toMatch(/<span class="block[^"]*" data-testid="mailbox-cc">cc <span/);
		expect(text).not.toContain('test· cc');
	});
});

/**
 * E-mail addresses on People and in the Mailbox (walk-through findings): an address wraps after its
 * "@" (a <wbr>), not mid-name as `break-all` let it ("ada.admi|n@dem|o…"), and anywhere only when a part
 * is longer than its column (`overflow-wrap: anywhere`, which also lets a table column shrink); the Mailbox's cc sits on a
 * line of its own with a space after "cc" (Svelte drops the space at the start of an element, which
 * ran "· cc" into the address before it).
 */
import { describe, it, expect } from 'vitest';
import { render } from 'svelte/server';
import EmailAddress from '../../src/lib/components/EmailAddress.svelte';
import Mailbox from '../../src/routes/mailbox/+page.svelte';

const strip = (html: string) => html.replace(/<!--[^]*?-->/g, '');

describe('EmailAddress', () => {
	it('offers a break after the @ only, and after each comma of a list', () => {
		expect(strip(render(EmailAddress, { props: { address: 'rita.reviewer@demo.crosstally.test' } }).body)).toBe(
			'<span class="[overflow-wrap:anywhere]">rita.reviewer@<wbr/>demo.crosstally.test</span>'
		);
		expect(strip(render(EmailAddress, { props: { address: 'a@x.test, b@y.test' } }).body)).toContain('a@<wbr/>x.test, b@<wbr/>y.test');
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

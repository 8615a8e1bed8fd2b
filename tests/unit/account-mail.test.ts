/**
 * The account e-mails (src/lib/server/mail/templates.ts: invitation and password reset), rendered
 * without any service. Expected strings are written by hand from the wording the users get; the
 * integration tests (tests/integration/auth.test.ts and others) check that the mail is sent and the
 * link works.
 */
import { describe, expect, it } from 'vitest';
import { invitationMail, resetMail } from '../../src/lib/server/mail/templates';

const hostile = `Kim <script>alert("x")</script> & O'Neil`;
const link = 'http://localhost:3000/set-password?token=abc&x="1"';

describe('invitation e-mail', () => {
	const m = invitationMail({ email: 'kim@example.test', name: hostile, link, hours: 72, invitedBy: 'Ada <Admin>' });

	it('goes to the invited address, with the subject and the plain-text wording', () => {
		expect(m.to).toEqual(['kim@example.test']);
		expect(m.subject).toBe('You are invited to Crosstally');
		expect(m.text).toContain(`Hello ${hostile},`);
		expect(m.text).toContain('Ada <Admin> has invited you to Crosstally');
		expect(m.text).toContain('(the link works once and expires in 72 hours):\n' + link);
	});

	it('escapes every value in the HTML part (no markup of the name or the inviter survives)', () => {
		expect(m.html).not.toContain('<script>');
		expect(m.html).not.toContain('<Admin>');
		expect(m.html).toContain('Hello Kim &lt;script>alert("x")&lt;/script> &amp; O\'Neil,');
		expect(m.html).toContain('Ada &lt;Admin> has invited you');
		// the link as the button's address: & and " escaped inside the attribute
		expect(m.html).toContain('href="http://localhost:3000/set-password?token=abc&amp;x=&quot;1&quot;"');
		expect(m.html).toContain('>Set your password</a>');
		expect(m.html).toContain('expires in 72 hours');
	});

	it('is a whole document in the common frame, without Svelte hydration markers', () => {
		expect(m.html.startsWith('<!doctype html><html><body')).toBe(true);
		expect(m.html.endsWith('</body></html>')).toBe(true);
		expect(m.html).toContain('<h1 style="font-size:20px;margin:0 0 12px">You are invited to Crosstally</h1>');
		expect(m.html).toContain('Scores support, and never replace, the judgement of a licensed clinician.');
		expect(m.html).not.toMatch(/<!--[[\]!\d-]*-->/);
	});
});

describe('password reset e-mail', () => {
	const m = resetMail({ email: 'kim@example.test', name: 'Kim', link: 'http://localhost:3000/set-password?token=r1', hours: 2 });

	it('says what happened and that ignoring it keeps the password', () => {
		expect(m.subject).toBe('Reset your Crosstally password');
		expect(m.text).toContain('expires in 2 hours):\nhttp://localhost:3000/set-password?token=r1');
		expect(m.text).toContain('If you did not ask for this, ignore this message: your password stays as it is.');
		expect(m.html).toContain('>Choose a new password</a>');
		expect(m.html).toContain('href="http://localhost:3000/set-password?token=r1"');
		expect(m.html).not.toContain('has invited you');
	});
});

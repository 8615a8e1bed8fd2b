/**
 * E-mail templates. Every message has a plain-text and an HTML part. Examinee names and birth
 * dates never appear in any e-mail: protocols are named by their pseudonymous code only.
 */
import type { OutgoingMail } from './transport';

export const esc = (s: unknown) => String(s ?? '').replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);

/** Wrap an HTML body in the common message layout. */
export function layout(title: string, bodyHtml: string): string {
	return `<!doctype html><html><body style="margin:0;background:#f7f4ee;font-family:'IBM Plex Sans',Arial,sans-serif;color:#1d2733">
<table role="presentation" width="100%" cellpadding="0" cellspacing="0"><tr><td style="padding:24px">
<table role="presentation" width="600" cellpadding="0" cellspacing="0" style="max-width:600px;background:#fffdf9;border:1px solid #dcd4c6;border-radius:6px">
<tr><td style="padding:16px 24px;border-bottom:1px solid #dcd4c6;font-weight:600;font-size:16px">Crosstally</td></tr>
<tr><td style="padding:20px 24px;font-size:14px;line-height:20px"><h1 style="font-size:20px;margin:0 0 12px">${esc(title)}</h1>${bodyHtml}</td></tr>
<tr><td style="padding:12px 24px;border-top:1px solid #dcd4c6;font-size:12px;color:#4a5563">Scores support, and never replace, the judgement of a licensed clinician. This message names protocols by pseudonymous code only.</td></tr>
</table></td></tr></table></body></html>`;
}

export function button(href: string, label: string): string {
	return `<p style="margin:20px 0"><a href="${esc(href)}" style="background:#1e5f74;color:#ffffff;padding:8px 14px;border-radius:4px;text-decoration:none;font-weight:600">${esc(label)}</a></p>`;
}

export function invitationMail(p: { email: string; name: string; link: string; hours: number; invitedBy: string }): OutgoingMail {
	const subject = 'You are invited to Crosstally';
	const text = `Hello ${p.name},

${p.invitedBy} has invited you to Crosstally, the double-entry scoring service of your assessment team.

Set your password here (the link works once and expires in ${p.hours} hours):
${p.link}

If you did not expect this, ignore this message.`;
	const html = layout(
		subject,
		`<p>Hello ${esc(p.name)},</p><p>${esc(p.invitedBy)} has invited you to Crosstally, the double-entry scoring service of your assessment team.</p>
${button(p.link, 'Set your password')}<p style="color:#4a5563">The link works once and expires in ${p.hours} hours. If the button does not work, copy this address: ${esc(p.link)}</p>`
	);
	return { to: [p.email], subject, text, html };
}

export function resetMail(p: { email: string; name: string; link: string; hours: number }): OutgoingMail {
	const subject = 'Reset your Crosstally password';
	const text = `Hello ${p.name},

Someone (we hope you) asked to reset your Crosstally password. Choose a new one here (the link works once and expires in ${p.hours} hours):
${p.link}

If you did not ask for this, ignore this message: your password stays as it is.`;
	const html = layout(
		subject,
		`<p>Hello ${esc(p.name)},</p><p>Someone (we hope you) asked to reset your Crosstally password.</p>${button(p.link, 'Choose a new password')}
<p style="color:#4a5563">The link works once and expires in ${p.hours} hours. If you did not ask for this, ignore this message.</p>`
	);
	return { to: [p.email], subject, text, html };
}

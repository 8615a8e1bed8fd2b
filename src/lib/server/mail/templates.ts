/**
 * The account e-mails: an invitation and a password reset. Every message has a plain-text part
 * (written here) and an HTML part (./AccountMail.svelte rendered on the server, escaped by
 * construction). Examinee names and birth dates never appear in any e-mail.
 */
import type { OutgoingMail } from './transport';
import { mailDocument } from './document';
import AccountMail from './AccountMail.svelte';

export function invitationMail(p: { email: string; name: string; link: string; hours: number; invitedBy: string }): OutgoingMail {
	const subject = 'You are invited to Crosstally';
	const text = `Hello ${p.name},

${p.invitedBy} has invited you to Crosstally, the double-entry scoring service of your assessment team.

Set your password here (the link works once and expires in ${p.hours} hours):
${p.link}

If you did not expect this, ignore this message.`;
	const html = mailDocument(AccountMail, { kind: 'invite', subject, name: p.name, link: p.link, hours: p.hours, invitedBy: p.invitedBy });
	return { to: [p.email], subject, text, html };
}

export function resetMail(p: { email: string; name: string; link: string; hours: number }): OutgoingMail {
	const subject = 'Reset your Crosstally password';
	const text = `Hello ${p.name},

Someone (we hope you) asked to reset your Crosstally password. Choose a new one here (the link works once and expires in ${p.hours} hours):
${p.link}

If you did not ask for this, ignore this message: your password stays as it is.`;
	const html = mailDocument(AccountMail, { kind: 'reset', subject, name: p.name, link: p.link, hours: p.hours });
	return { to: [p.email], subject, text, html };
}

/** The SMTP transport (nodemailer). Production: SMTP_URL. Demo and test: the local mail fake. */
import nodemailer, { type Transporter } from 'nodemailer';
import { config } from '../config';

let transporter: Transporter | null = null;

export function mailTransport(): Transporter {
	if (!transporter) {
		const local = config.smtpUrl.includes('127.0.0.1') || config.smtpUrl.includes('localhost');
		transporter = nodemailer.createTransport(config.smtpUrl, {
			// The local fake speaks plain SMTP on loopback; real servers negotiate TLS.
			...(local ? { ignoreTLS: true, secure: false } : {}),
			// Pooled SMTP connections (issue 18) were tried and taken out again: under the shared
			// machine's load they could not be shown to help, and a mail test timed out with them.
			connectionTimeout: 5_000,
			greetingTimeout: 5_000,
			socketTimeout: 10_000
		});
	}
	return transporter;
}

/** Close the transport (worker shutdown). */
export function closeMailTransport(): void {
	if (transporter) {
		const t = transporter;
		transporter = null;
		t.close();
	}
}

export interface OutgoingMail {
	to: string[];
	cc?: string[];
	subject: string;
	text: string;
	html: string;
	headers?: Record<string, string>;
}

export async function sendMail(mail: OutgoingMail): Promise<string | null> {
	const info = await mailTransport().sendMail({
		from: config.mailFrom,
		to: mail.to,
		cc: mail.cc && mail.cc.length ? mail.cc : undefined,
		subject: mail.subject,
		text: mail.text,
		html: mail.html,
		headers: mail.headers
	});
	return info.messageId ?? null;
}

/** The SMTP transport (nodemailer). Production: SMTP_URL. Demo and test: the local mail fake. */
import nodemailer, { type Transporter } from 'nodemailer';
import { parseConnectionUrl } from 'nodemailer/lib/shared';
import type SMTPPool from 'nodemailer/lib/smtp-pool';
import { config } from '../config';

let transporter: Transporter | null = null;

export function mailTransport(): Transporter {
	if (!transporter) {
		const local = config.smtpUrl.includes('127.0.0.1') || config.smtpUrl.includes('localhost');
		// The connection options go with the URL's (one object): a second argument to createTransport would be
		// the messages' defaults, where pool and the timeouts have no effect (they had none until issue 18).
		// maxRequeues is read by the pool (nodemailer/lib/smtp-pool) but missing from its type
		const options: SMTPPool.Options & { maxRequeues: number } = {
			...parseConnectionUrl(config.smtpUrl),
			// The local fake speaks plain SMTP on loopback; real servers negotiate TLS.
			...(local ? { ignoreTLS: true, secure: false } : {}),
			// Pooled SMTP connections (issue 18): an SMTP session carries up to SMTP_POOL_MESSAGES (100)
			// messages instead of a connect + greeting + EHLO + QUIT per message; up to SMTP_POOL (32) at
			// once for the worker's concurrent jobs (more jobs wait for a free connection). Each message is
			// four round trips (MAIL, RCPT, DATA, the body) on its connection whatever the server offers:
			// nodemailer pipelines only the RCPT TO of several recipients (PIPELINING, which the fake
			// advertises), never MAIL/RCPT/DATA. So the pool's size bounds the rate: 1,000 messages straight
			// to the mail fake on the loaded 2-core machine went 142-148/s with 8 connections, 246-251/s with
			// 16, 400-456/s with 32, 440-551/s with 64; in bench:mail, 32 against 16 interleaved (3 runs each):
			// tail after the last commit 3.4-4.7 s against 4.8-7.1 s, p95 3.5-5.0 s against 4.7-7.3 s, the
			// worker's CPU unchanged. A provider that allows fewer connections at once needs SMTP_POOL set lower.
			pool: true,
			maxConnections: Number(process.env.SMTP_POOL ?? 32),
			maxMessages: Number(process.env.SMTP_POOL_MESSAGES ?? 100),
			// A connection that closes mid-send fails that send (../deliver.ts decides about a retry), as a
			// single connection does; the pool's default would hand the message to another connection
			// unseen, a second copy if the server had accepted it already.
			maxRequeues: 0,
			connectionTimeout: 5_000,
			greetingTimeout: 5_000,
			socketTimeout: 10_000
		};
		transporter = nodemailer.createTransport(options);
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
		headers: mail.headers,
		// base64 bodies (Buffer's native encoder) instead of nodemailer's choice, quoted-printable for mostly
		// Latin text, encoded and line-wrapped in JavaScript: that was the largest part of the worker's CPU
		// per message left after the batches (issue 18; a CPU profile of bench:mail)
		textEncoding: 'base64'
	});
	return info.messageId ?? null;
}

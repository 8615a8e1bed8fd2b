/** Reading the local mail fake's catch (demo and test mode only). */
import { config } from './config';

export interface CaughtMail {
	id: string;
	receivedAt: string;
	envelope: { from: string | null; to: string[] };
	from: string;
	to: string;
	cc: string;
	subject: string;
	text: string;
	html: string | null;
}

export function mailboxEnabled(): boolean {
	return config.mailFakeUrl !== null;
}

export type CaughtSummary = Pick<CaughtMail, 'id' | 'receivedAt' | 'envelope' | 'from' | 'to' | 'cc' | 'subject'>;

/** One page of the catch, newest first, without the bodies; `total` counts every caught message. */
export async function listCaught(page = 1, perPage = MAILBOX_PAGE): Promise<{ messages: CaughtSummary[]; total: number }> {
	if (!config.mailFakeUrl) return { messages: [], total: 0 };
	const offset = (Math.max(1, page) - 1) * perPage;
	const res = await fetch(`${config.mailFakeUrl}/messages?newest=1&summary=1&limit=${perPage}&offset=${offset}`);
	if (!res.ok) throw new Error(`mail fake answered ${res.status}`);
	return { messages: (await res.json()) as CaughtSummary[], total: Number(res.headers.get('x-total-count') ?? 0) };
}

/** Messages per Mailbox page: a full test run leaves thousands, which one page cannot hold. */
export const MAILBOX_PAGE = 50;

export async function getCaught(id: string): Promise<CaughtMail | null> {
	if (!config.mailFakeUrl || !/^[\w-]+$/.test(id)) return null;
	const res = await fetch(`${config.mailFakeUrl}/messages/${id}`);
	return res.ok ? ((await res.json()) as CaughtMail) : null;
}

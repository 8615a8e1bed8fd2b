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

export async function listCaught(): Promise<CaughtMail[]> {
	if (!config.mailFakeUrl) return [];
	const res = await fetch(`${config.mailFakeUrl}/messages`);
	if (!res.ok) throw new Error(`mail fake answered ${res.status}`);
	return ((await res.json()) as CaughtMail[]).reverse();
}

export async function getCaught(id: string): Promise<CaughtMail | null> {
	if (!config.mailFakeUrl || !/^[\w-]+$/.test(id)) return null;
	const res = await fetch(`${config.mailFakeUrl}/messages/${id}`);
	return res.ok ? ((await res.json()) as CaughtMail) : null;
}

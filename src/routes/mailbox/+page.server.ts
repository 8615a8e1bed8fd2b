import type { PageServerLoad } from './$types';
import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { listCaught, mailboxEnabled } from '$lib/server/mailbox';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'admin');
	if (!mailboxEnabled()) error(404, { message: 'The mailbox exists only in demo and test mode.' });
	try {
		const messages = await listCaught();
		return { messages: messages.map(({ id, receivedAt, to, cc, subject, from }) => ({ id, receivedAt, to, cc, subject, from })), down: false };
	} catch {
		return { messages: [], down: true };
	}
};

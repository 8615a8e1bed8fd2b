import type { PageServerLoad } from './$types';
import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { listCaught, mailboxEnabled, MAILBOX_PAGE } from '$lib/server/mailbox';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'admin');
	if (!mailboxEnabled()) error(404, { message: 'The mailbox exists only in demo and test mode.' });
	const raw = event.url.searchParams.get('page');
	const page = raw === null ? 1 : Number(raw);
	if (!Number.isInteger(page) || page < 1) error(400, { message: `page: "${raw}" is not a page number (1, 2, …).`, code: 'bad_request' });
	try {
		const { messages, total } = await listCaught(page);
		return {
			messages: messages.map(({ id, receivedAt, to, cc, subject, from }) => ({ id, receivedAt, to, cc, subject, from })),
			total,
			page,
			perPage: MAILBOX_PAGE,
			down: false
		};
	} catch {
		return { messages: [], total: 0, page, perPage: MAILBOX_PAGE, down: true };
	}
};

import type { PageServerLoad } from './$types';
import { requireRole, notFound } from '$lib/server/guard';
import { getCaught, mailboxEnabled } from '$lib/server/mailbox';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'admin');
	if (!mailboxEnabled()) notFound('This mailbox');
	const message = await getCaught(event.params.id);
	if (!message) notFound('This message');
	return { message };
};

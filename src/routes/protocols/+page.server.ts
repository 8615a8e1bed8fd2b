import type { PageServerLoad } from './$types';
import { requireUser } from '$lib/server/guard';
import { listProtocols, type Status } from '$lib/server/protocols/service';

const STATUSES = ['draft', 'awaiting_second', 'in_review', 'verified'];

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	const q = event.url.searchParams;
	const status = STATUSES.includes(q.get('status') ?? '') ? (q.get('status') as Status) : null;
	const page = Math.max(1, Number(q.get('page')) || 1);
	const search = (q.get('q') ?? '').slice(0, 40) || null;
	const list = await listProtocols(user, { status, q: search, page });
	return { ...list, status, q: search, canCreate: user.roles.includes('lead') };
};

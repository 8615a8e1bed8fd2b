import type { PageServerLoad } from './$types';
import { error } from '@sveltejs/kit';
import { requireUser } from '$lib/server/guard';
import { listProtocols, type Status } from '$lib/server/protocols/service';

const STATUSES = ['draft', 'awaiting_second', 'in_review', 'verified'];

/** ?page=: a whole number from 1; anything else (1.5, 1e308, Infinity, -2) is a 400 naming the parameter. */
function pageParam(raw: string | null): number {
	if (raw === null || raw === '') return 1;
	if (!/^[1-9]\d{0,5}$/.test(raw)) error(400, { message: `page: use a whole page number from 1 to 999999 (got "${raw.slice(0, 24)}").`, code: 'invalid' });
	return Number(raw);
}

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	const q = event.url.searchParams;
	const status = STATUSES.includes(q.get('status') ?? '') ? (q.get('status') as Status) : null;
	const page = pageParam(q.get('page'));
	const search = (q.get('q') ?? '').slice(0, 40) || null;
	const list = await listProtocols(user, { status, q: search, page });
	return { ...list, status, q: search, canCreate: user.roles.includes('lead') };
};

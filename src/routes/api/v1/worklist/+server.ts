import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireUser } from '$lib/server/guard';
import { worklist } from '$lib/server/protocols/service';

export const GET: RequestHandler = async (event) => {
	const user = requireUser(event);
	const items = await worklist(user);
	return json({ items, now: new Date().toISOString() });
};

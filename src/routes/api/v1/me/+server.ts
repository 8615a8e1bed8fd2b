import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireUser } from '$lib/server/guard';

export const GET: RequestHandler = async (event) => {
	const user = requireUser(event);
	return json({ id: user.id, name: user.name, email: user.email, roles: user.roles });
};

import type { PageServerLoad } from './$types';
import { requireUser } from '$lib/server/guard';
import { worklist } from '$lib/server/protocols/service';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	return { name: user.name, roles: user.roles, items: await worklist(user), now: new Date().toISOString() };
};

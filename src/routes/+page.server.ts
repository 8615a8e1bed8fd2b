import type { PageServerLoad } from './$types';
import { requireUser } from '$lib/server/guard';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	return { name: user.name };
};

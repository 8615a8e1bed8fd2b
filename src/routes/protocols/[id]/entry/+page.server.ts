import type { PageServerLoad } from './$types';
import { requireRole, idParam } from '$lib/server/guard';
import { entryView } from '$lib/server/protocols/passes';
import { pageError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireRole(event, 'scorer');
	const id = idParam(event.params.id, 'This protocol');
	try {
		return await entryView(id, user);
	} catch (e) {
		pageError(e);
	}
};

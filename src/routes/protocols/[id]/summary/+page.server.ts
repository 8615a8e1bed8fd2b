import type { PageServerLoad } from './$types';
import { requireUser, idParam } from '$lib/server/guard';
import { protocolSummary } from '$lib/server/protocols/summary';
import { pageError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	try {
		return { summary: await protocolSummary(idParam(event.params.id, 'This protocol'), user) };
	} catch (e) {
		pageError(e);
	}
};

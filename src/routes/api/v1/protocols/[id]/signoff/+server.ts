import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, idParam } from '$lib/server/guard';
import { signOff } from '$lib/server/protocols/decisions';
import { apiError, readJson } from '$lib/server/http';

export const POST: RequestHandler = async (event) => {
	const user = requireRole(event, 'reviewer');
	try {
		return json(await signOff(idParam(event.params.id, 'This protocol'), user, await readJson(event.request)));
	} catch (e) {
		return apiError(e);
	}
};

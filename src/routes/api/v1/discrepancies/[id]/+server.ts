import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, idParam } from '$lib/server/guard';
import { resolveDiscrepancy } from '$lib/server/protocols/decisions';
import { apiError, readJson } from '$lib/server/http';

/** Resolve: { choice: first|second|recomputed|other, value?, note?, lockVersion }. 409 when someone else was first. */
export const PATCH: RequestHandler = async (event) => {
	const user = requireRole(event, 'reviewer');
	try {
		return json(await resolveDiscrepancy(idParam(event.params.id, 'This discrepancy'), user, await readJson(event.request)));
	} catch (e) {
		return apiError(e);
	}
};

import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, idParam } from '$lib/server/guard';
import { decideAmendment } from '$lib/server/protocols/amendments';
import { apiError, readJson } from '$lib/server/http';

/** A lead decides a reviewer's amendment request: { decision: approve|refuse, note? }. */
export const POST: RequestHandler = async (event) => {
	const user = requireRole(event, 'lead');
	try {
		return json(await decideAmendment(idParam(event.params.id, 'This amendment'), user, await readJson(event.request)));
	} catch (e) {
		return apiError(e);
	}
};

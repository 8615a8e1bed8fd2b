import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, idParam } from '$lib/server/guard';
import { proposeAmendment } from '$lib/server/protocols/amendments';
import { apiError, readJson } from '$lib/server/http';

/** Amend one field of a verified protocol: { test, field, value, reason }. A lead's applies now; a reviewer's waits for a lead. */
export const POST: RequestHandler = async (event) => {
	const user = requireRole(event, 'lead', 'reviewer');
	try {
		return json(await proposeAmendment(idParam(event.params.id, 'This protocol'), user, await readJson(event.request)));
	} catch (e) {
		return apiError(e);
	}
};

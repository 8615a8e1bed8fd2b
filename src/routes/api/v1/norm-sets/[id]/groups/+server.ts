import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, idParam } from '$lib/server/guard';
import { saveNormGroup } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

/**
 * Body: one norm group in any form (mean/SD, table with rows, regression with coefficients): it
 * replaces the set's group with the same test and code, or is added. Refusals name the rows.
 */
export const POST: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		return json({ group: await saveNormGroup(idParam(event.params.id), await readJson(event.request), user.id) });
	});

import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser } from '$lib/server/guard';
import { createNormSet, listNormSets } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

export const GET: RequestHandler = async (event) => {
	requireUser(event);
	return json({ normSets: await listNormSets() });
};

/** Body: { code, name, source, version, borrow_days: "30"|"actual", rounding: "truncate"|"round_days" }. */
export const POST: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		return json({ normSet: await createNormSet(await readJson(event.request), user.id) }, { status: 201 });
	});

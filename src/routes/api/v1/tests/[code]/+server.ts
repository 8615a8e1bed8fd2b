import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser } from '$lib/server/guard';
import { getTest, testVersions, updateTest, notFoundError } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

/** The current version and the history of versions (with how many protocols use each). */
export const GET: RequestHandler = (event) =>
	api(async () => {
		requireUser(event);
		const test = await getTest(event.params.code);
		if (!test) throw notFoundError('This test');
		return json({ test, versions: await testVersions(event.params.code) });
	});

/** Replace the test's definition; answers whether it was updated in place or a new version was made. */
export const PUT: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		const out = await updateTest(event.params.code, await readJson(event.request), user.id);
		return json(out);
	});

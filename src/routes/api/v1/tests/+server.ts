import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser } from '$lib/server/guard';
import { createTest, listTests } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

/** Current versions of all tests (optionally of one domain), in domain order. */
export const GET: RequestHandler = async (event) => {
	requireUser(event);
	const domain = event.url.searchParams.get('domain') ?? undefined;
	return json({ tests: await listTests({ domain }) });
};

export const POST: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		const test = await createTest(await readJson(event.request), user.id);
		return json({ test }, { status: 201 });
	});

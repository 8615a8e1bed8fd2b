import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser } from '$lib/server/guard';
import { createBattery, listBatteries } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

export const GET: RequestHandler = async (event) => {
	requireUser(event);
	return json({ batteries: await listBatteries() });
};

export const POST: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		return json({ battery: await createBattery(await readJson(event.request), user.id) }, { status: 201 });
	});

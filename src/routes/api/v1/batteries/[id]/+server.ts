import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser, idParam } from '$lib/server/guard';
import { getBattery, updateBattery, notFoundError } from '$lib/server/catalog';
import { api, readJson } from '$lib/server/http';

/** The battery with its tests in order and grouped by domain. */
export const GET: RequestHandler = (event) =>
	api(async () => {
		requireUser(event);
		const battery = await getBattery(idParam(event.params.id));
		if (!battery) throw notFoundError('This battery');
		return json({ battery });
	});

export const PUT: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		return json({ battery: await updateBattery(idParam(event.params.id), await readJson(event.request), user.id) });
	});

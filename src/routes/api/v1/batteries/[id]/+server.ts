import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole, requireUser } from '$lib/server/guard';
import { getBattery, updateBattery, notFoundError } from '$lib/server/catalog';
import { api, idOf, readJson } from '$lib/server/catalog/api';

/** The battery with its tests in order and grouped by domain. */
export const GET: RequestHandler = (event) =>
	api(async () => {
		requireUser(event);
		const battery = await getBattery(idOf(event.params.id));
		if (!battery) throw notFoundError('This battery');
		return json({ battery });
	});

export const PUT: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		return json({ battery: await updateBattery(idOf(event.params.id), await readJson(event.request), user.id) });
	});

import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole, requireUser, idParam } from '$lib/server/guard';
import { normSetWithGroups, updateNormSetWithGroups } from '$lib/server/catalog';
import { api, parseWith, readJson } from '$lib/server/http';
import { normGroupSchema, normSetPatchSchema } from '$lib/catalog/schema';

/** The norm set and its groups (optionally of one test: ?test=code). */
export const GET: RequestHandler = (event) =>
	api(async () => {
		requireUser(event);
		const id = idParam(event.params.id);
		return json(await normSetWithGroups(id, { test: event.url.searchParams.get('test') ?? undefined }));
	});

const putSchema = normSetPatchSchema.extend({ groups: z.array(normGroupSchema).max(200_000).optional() });

/**
 * Change the norm set's details, and with `groups` replace the groups of every test named in
 * them (all or nothing; age ranges checked; refused when a protocol used a replaced group).
 */
export const PUT: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		const id = idParam(event.params.id);
		const { groups, ...meta } = parseWith(putSchema, await readJson(event.request));
		return json(await updateNormSetWithGroups(id, meta, groups, user.id));
	});

import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole, requireUser } from '$lib/server/guard';
import { transaction } from '$lib/server/db';
import { audit } from '$lib/server/audit';
import { assertRanges, getNormSet, listNormGroups, replaceNormGroups, updateNormSet, notFoundError } from '$lib/server/catalog';
import { api, idOf, parseWith, readJson } from '$lib/server/catalog/api';
import { normGroupSchema, normSetSchema } from '$lib/catalog/schema';

/** The norm set and its groups (optionally of one test: ?test=code). */
export const GET: RequestHandler = (event) =>
	api(async () => {
		requireUser(event);
		const id = idOf(event.params.id);
		const normSet = await getNormSet(id);
		if (!normSet) throw notFoundError('This norm set');
		return json({ normSet, groups: await listNormGroups(id, { test: event.url.searchParams.get('test') ?? undefined }) });
	});

const putSchema = normSetSchema.partial().extend({ groups: z.array(normGroupSchema).max(200_000).optional() });

/**
 * Change the norm set's details, and with `groups` replace the groups of every test named in
 * them (all or nothing; age ranges checked; refused when a protocol used a replaced group).
 */
export const PUT: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		const id = idOf(event.params.id);
		const raw = await readJson(event.request);
		const body = parseWith(putSchema, raw);
		const current = await getNormSet(id);
		if (!current) throw notFoundError('This norm set');
		const { groups, ...parsed } = body;
		// Only the keys the client sent (the schema's defaults would otherwise reset the age rules).
		const sent = new Set(raw && typeof raw === 'object' ? Object.keys(raw) : []);
		const meta = Object.fromEntries(Object.entries(parsed).filter(([k]) => sent.has(k)));
		if (Object.keys(meta).length) {
			await updateNormSet(
				id,
				{ code: current.code, name: current.name, source: current.source, version: current.version, borrow_days: String(current.age_rule.borrowDays), rounding: current.age_rule.rounding, covariate_age: current.covariate_age, ...meta },
				user.id
			);
		}
		if (groups) {
			assertRanges(groups.map((g, i) => ({ ...g, label: `groups[${i}] (${g.group_code})` })));
			await transaction(async (tr) => {
				const r = await replaceNormGroups(id, groups.map((g, i) => ({ ...g, label: `groups[${i}] (${g.test_code} ${g.group_code})` })), tr);
				await audit({ actorId: user.id, entity: 'norm_set', entityId: id, action: 'replace_groups', newValue: r }, tr);
			});
		}
		return json({ normSet: await getNormSet(id), groups: await listNormGroups(id) });
	});

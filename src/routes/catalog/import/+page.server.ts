import type { PageServerLoad } from './$types';
import { requireRole } from '$lib/server/guard';
import { listNormSets } from '$lib/server/catalog';
import { validationContext } from '$lib/server/catalog/io';
import { LIMITS } from '$lib/catalog/csv';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const [ctx, normSets] = await Promise.all([validationContext(), listNormSets()]);
	const set = Number(event.url.searchParams.get('set'));
	return {
		testCodes: [...ctx.testCodes],
		domains: [...ctx.domains],
		spans: ctx.spans ?? {},
		normSets: normSets.map((n) => ({ id: n.id, name: n.name, version: n.version, groups: n.groups })),
		kind: (['tests', 'tables', 'equations'] as const).find((k) => k === event.url.searchParams.get('kind')) ?? ('norms' as const),
		set: normSets.some((n) => n.id === set) ? set : null,
		limits: LIMITS,
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

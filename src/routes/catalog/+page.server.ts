import type { PageServerLoad } from './$types';
import { requireRole } from '$lib/server/guard';
import { listBatteries, listDomains, listNormSets, listTests } from '$lib/server/catalog';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const [tests, domains, batteries, normSets] = await Promise.all([listTests(), listDomains(), listBatteries(), listNormSets()]);
	return {
		counts: { tests: tests.length, lowerBetter: tests.filter((t) => t.direction === 'lower_better').length },
		domains,
		batteries,
		normSets
	};
};

import type { PageServerLoad } from './$types';
import { auditScreen, parseFilters } from '$lib/server/audit-stats';

/**
 * The Audit screen, driven by the URL: the filters are query parameters (a link or a reload shows
 * the same tables). Bad values are named beside their filter and nothing is counted.
 */
export const load: PageServerLoad = async ({ url }) => {
	const parsed = parseFilters(url.searchParams);
	const screen = await auditScreen(parsed.ok ? parsed.filters : null);
	return { ...screen, filters: parsed.ok ? parsed.filters : null, errors: parsed.ok ? {} : parsed.errors };
};

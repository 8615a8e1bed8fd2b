import type { PageServerLoad } from './$types';
import { select } from '$lib/server/db';
import { kindList } from '$lib/scoring/kinds';
import { LANDIS_KOCH_1977, KOO_LI_2016 } from '$lib/scoring/agreement';

/** The filter choices; the tables and charts themselves come from /api/v1/audit/[report]. */
export const load: PageServerLoad = async () => {
	const [scorers, batteries, tests] = await Promise.all([
		select<{ id: number; name: string }>(
			`SELECT id, name FROM users WHERE FIND_IN_SET('scorer', roles) > 0
			    OR id IN (SELECT DISTINCT scorer_id FROM audit_daily) ORDER BY name`
		),
		select<{ id: number; name: string }>('SELECT id, name FROM batteries ORDER BY name'),
		select<{ code: string; name: string; domain: string }>('SELECT code, name, domain FROM tests WHERE is_current = 1 ORDER BY name')
	]);
	return {
		options: {
			scorers: scorers.map((s) => ({ id: Number(s.id), name: s.name })),
			batteries: batteries.map((b) => ({ id: Number(b.id), name: b.name })),
			tests,
			kinds: kindList().map((k) => ({ id: k.id, label: k.name, explanation: k.explanation }))
		},
		bands: { kappa: LANDIS_KOCH_1977, icc: KOO_LI_2016 }
	};
};

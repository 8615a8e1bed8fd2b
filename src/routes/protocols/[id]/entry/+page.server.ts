import type { PageServerLoad } from './$types';
import { requireRole, idParam } from '$lib/server/guard';
import { myPass } from '$lib/server/protocols/passes';
import { selectOne } from '$lib/server/db';
import { pageError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireRole(event, 'scorer');
	const id = idParam(event.params.id, 'This protocol');
	try {
		const pass = await myPass(id, user);
		const ex = await selectOne<{ code: string }>('SELECT code FROM examinees WHERE id = :id', { id: pass.protocol.examinee_id });
		const battery = await selectOne<{ name: string }>('SELECT name FROM batteries WHERE id = :id', { id: pass.protocol.battery_id });
		// Only what the scorer needs to look scores up: never norms, references or the other pass.
		return {
			protocol: {
				id: pass.protocol.id,
				code: ex!.code,
				testDate: pass.protocol.test_date,
				age: pass.protocol.age_text,
				status: pass.protocol.status,
				battery: battery!.name
			},
			which: pass.which,
			status: pass.status,
			scores: pass.scores,
			draftVersion: pass.draftVersion,
			submittedAt: pass.submittedAt,
			// percentileOnly: the norm gives percentile bands (typed as the manual writes them), not a reference
			tests: pass.tests.map((t) => ({
				code: t.code,
				name: t.name,
				domain: t.domainName,
				unit: t.unit,
				direction: t.direction,
				group: t.groupText,
				raw: t.raw,
				bounds: t.bounds,
				reported: t.reported,
				percentileOnly: t.normScale === 'percentile'
			})),
			composites: pass.composites.map((c) => ({
				code: c.code,
				name: c.name,
				parts: c.parts,
				partField: c.part_field,
				reported: c.reported,
				group: c.groupText
			}))
		};
	} catch (e) {
		pageError(e);
	}
};

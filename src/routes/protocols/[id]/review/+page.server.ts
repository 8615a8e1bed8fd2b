import type { PageServerLoad } from './$types';
import { requireUser, idParam } from '$lib/server/guard';
import { reviewView, previousDecisions } from '$lib/server/protocols/decisions';
import { protocolHeader } from '$lib/server/protocols/service';
import { pageError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	const id = idParam(event.params.id, 'This protocol');
	try {
		const review = await reviewView(id, user);
		const view = await protocolHeader(id, user);
		const previous = await previousDecisions(id, review.protocol.round);
		return {
			protocol: {
				id,
				code: view.examinee.code,
				status: review.protocol.status,
				round: review.protocol.round,
				lockVersion: review.protocol.lock_version,
				battery: view.battery.name,
				testDate: review.protocol.test_date,
				age: review.protocol.age_text
			},
			assignments: view.assignments,
			canResolve: review.canResolve,
			singlePass: review.singlePass,
			discrepancies: review.discrepancies,
			attachments: view.attachments,
			previous
		};
	} catch (e) {
		pageError(e);
	}
};

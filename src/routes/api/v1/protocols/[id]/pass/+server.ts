import type { RequestHandler } from './$types';
import { json, isHttpError } from '@sveltejs/kit';
import { ServiceError } from '$lib/server/errors';
import { isDbUnavailable } from '$lib/server/db';
import { requireRole, idParam } from '$lib/server/guard';
import { myPass, saveDraft, submitPass } from '$lib/server/protocols/passes';
import { apiError, readJson } from '$lib/server/http';

/** The caller's own pass only: the other scorer's pass is never reachable here. */
export const GET: RequestHandler = async (event) => {
	const user = requireRole(event, 'scorer');
	try {
		const p = await myPass(idParam(event.params.id, 'This protocol'), user);
		return json({ which: p.which, status: p.status, scores: p.scores, draftVersion: p.draftVersion, submittedAt: p.submittedAt });
	} catch (e) {
		return apiError(e);
	}
};

/** Save the draft: { scores, draftVersion } → { draftVersion, fieldsEntered }. */
export const PUT: RequestHandler = async (event) => {
	const user = requireRole(event, 'scorer');
	try {
		return json(await saveDraft(idParam(event.params.id, 'This protocol'), user, await readJson(event.request)));
	} catch (e) {
		return apiError(e);
	}
};

/** Submit the pass: { draftVersion }. The second submission reconciles. */
export const POST: RequestHandler = async (event) => {
	const user = requireRole(event, 'scorer');
	try {
		return json(await submitPass(idParam(event.params.id, 'This protocol'), user, await readJson(event.request)));
	} catch (e) {
		if (e instanceof ServiceError || isHttpError(e) || isDbUnavailable(e)) return apiError(e);
		// The transaction rolled back: say so plainly (the detail is logged, never sent).
		console.error(`[submit] protocol ${event.params.id}:`, e instanceof Error ? e.stack : e);
		return json(
			{
				message:
					'Submitting failed and nothing was changed: your pass is still a saved draft. The error is logged; try again, or tell your lead if it keeps happening.',
				code: 'submit_failed'
			},
			{ status: 500 }
		);
	}
};

import type { Actions, PageServerLoad } from './$types';
import { requireRole } from '$lib/server/guard';
import { verificationAudit, setPolicy } from '$lib/server/verification';
import { actionError } from '$lib/server/http';
import { invalid } from '$lib/server/errors';

/** Risk-based verification: each battery's second-pass policy and each scorer's standing and risk. */
export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead');
	return verificationAudit();
};

export const actions: Actions = {
	policy: async (event) => {
		const user = requireRole(event, 'lead');
		const form = Object.fromEntries(await event.request.formData());
		try {
			const batteryId = Number(form.batteryId);
			if (!Number.isInteger(batteryId) || batteryId <= 0) throw invalid('batteryId: choose a battery', 'batteryId');
			const saved = await setPolicy(batteryId, form, user);
			return { action: 'policy', ok: true, batteryId, mode: saved.mode };
		} catch (e) {
			return actionError(e, 'policy');
		}
	}
};

import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { protocolFormChoices } from '$lib/server/catalog';
import { createProtocol, type UncoveredTest } from '$lib/server/protocols/service';
import { ServiceError } from '$lib/server/errors';
import { newProtocolSchema, overridesFrom } from '$lib/validation/protocol';
import { clinicToday, clinicTimeZone } from '$lib/server/clock';
import { fieldMessages } from '$lib/validation/issues';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead');
	return {
		...(await protocolFormChoices()),
		// The clinic's calendar day, not the UTC one: the default and the latest test date.
		today: clinicToday(),
		timeZone: clinicTimeZone()
	};
};

export const actions: Actions = {
	default: async (event) => {
		const actor = requireRole(event, 'lead');
		const values = Object.fromEntries(await event.request.formData()) as Record<string, string>;
		const parsed = newProtocolSchema.safeParse(values);
		if (!parsed.success) return fail(400, { values, errors: fieldMessages(parsed.error) });
		const v = parsed.data;
		try {
			const id = await createProtocol(
				{
					examinee: {
						code: v.code,
						birthDate: v.birthDate || undefined,
						sex: (v.sex || null) as 'F' | 'M' | 'X' | null,
						educationYears: v.educationYears === '' || v.educationYears === undefined ? null : Number(v.educationYears),
						name: v.name || null
					},
					batteryId: v.batteryId,
					normSetId: v.normSetId ? Number(v.normSetId) : null,
					testDate: v.testDate,
					firstScorerId: v.firstScorerId,
					secondScorerId: v.secondScorerId,
					reviewerId: v.reviewerId,
					overrides: overridesFrom(values)
				},
				actor
			);
			redirect(303, `/protocols/${id}?created=1`);
		} catch (e) {
			if (e instanceof ServiceError)
				return fail(e.status, { values, errors: { [e.field ?? 'form']: e.message }, uncovered: (e.detail?.uncovered as UncoveredTest[] | undefined) ?? null });
			throw e;
		}
	}
};

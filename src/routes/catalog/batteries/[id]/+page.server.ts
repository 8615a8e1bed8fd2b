import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate, message } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole, idParam, notFound } from '$lib/server/guard';
import { getBattery, listTests, listDomains, listNormSets, updateBattery } from '$lib/server/catalog';
import { batterySchema } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const battery = await getBattery(idParam(event.params.id, 'This battery'));
	if (!battery) notFound('This battery');
	const [tests, domains, normSets] = await Promise.all([listTests(), listDomains(), listNormSets()]);
	return {
		battery,
		tests: tests.map((t) => ({ code: t.code, name: t.name, domain: t.domain })),
		domains,
		normSets: normSets.map((n) => ({ id: n.id, name: n.name, version: n.version })),
		form: await superValidate(
			{
				code: battery.code,
				name: battery.name,
				description: battery.description ?? '',
				norm_set_id: battery.norm_set_id,
				tests: battery.items.map((i) => i.code)
			},
			zod4(batterySchema)
		),
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

export const actions: Actions = {
	default: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(batterySchema));
		if (!form.valid) return fail(400, { form });
		try {
			await updateBattery(idParam(event.params.id, 'This battery'), form.data, user.id);
			return message(form, 'Saved.');
		} catch (e) {
			return formError(form, e);
		}
	}
};

import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole } from '$lib/server/guard';
import { listBatteries, listTests, listDomains, listNormSets, createBattery } from '$lib/server/catalog';
import { batterySchema } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const [batteries, tests, domains, normSets] = await Promise.all([listBatteries(), listTests(), listDomains(), listNormSets()]);
	return {
		batteries,
		tests: tests.map((t) => ({ code: t.code, name: t.name, domain: t.domain })),
		domains,
		normSets: normSets.map((n) => ({ id: n.id, name: n.name, version: n.version })),
		form: await superValidate(zod4(batterySchema)),
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

export const actions: Actions = {
	create: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(batterySchema));
		if (!form.valid) return fail(400, { form });
		let id: number;
		try {
			id = (await createBattery(form.data, user.id)).id;
		} catch (e) {
			return formError(form, e);
		}
		redirect(303, `/catalog/batteries/${id}`);
	}
};

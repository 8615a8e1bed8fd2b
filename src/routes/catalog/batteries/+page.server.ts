import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole } from '$lib/server/guard';
import { batteriesScreen, createBattery } from '$lib/server/catalog';
import { batterySchema } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	return {
		...(await batteriesScreen()),
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

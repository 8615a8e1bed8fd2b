import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole } from '$lib/server/guard';
import { listNormSets, createNormSet } from '$lib/server/catalog';
import { normSetSchema } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	return { normSets: await listNormSets(), form: await superValidate(zod4(normSetSchema)), canEdit: event.locals.user!.roles.includes('lead') };
};

export const actions: Actions = {
	create: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(normSetSchema));
		if (!form.valid) return fail(400, { form });
		let id: number;
		try {
			id = (await createNormSet(form.data, user.id)).id;
		} catch (e) {
			return formError(form, e);
		}
		redirect(303, `/catalog/norm-sets/${id}`);
	}
};

import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate, message, setError } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole } from '$lib/server/guard';
import { testsScreen, createTest, createDomain, ServiceError } from '$lib/server/catalog';
import { testFormSchema, formToTestInput, domainSchema } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	return {
		...(await testsScreen()),
		form: await superValidate(zod4(testFormSchema)),
		domainForm: await superValidate(zod4(domainSchema)),
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

export const actions: Actions = {
	create: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(testFormSchema));
		if (!form.valid) return fail(400, { form });
		try {
			const t = await createTest(formToTestInput(form.data), user.id);
			return message(form, `Added ${t.name} (${t.code}).`);
		} catch (e) {
			return formError(form, e);
		}
	},
	domain: async (event) => {
		const user = requireRole(event, 'lead');
		const domainForm = await superValidate(event.request, zod4(domainSchema));
		if (!domainForm.valid) return fail(400, { domainForm });
		try {
			await createDomain(domainForm.data, user.id);
			return message(domainForm, `Added the domain ${domainForm.data.name}.`);
		} catch (e) {
			if (e instanceof ServiceError) return setError(domainForm, 'code', e.fields.code ?? e.message);
			throw e;
		}
	}
};

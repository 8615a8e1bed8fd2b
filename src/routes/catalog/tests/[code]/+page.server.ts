import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate, message } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole, notFound } from '$lib/server/guard';
import { testDetail, updateTest } from '$lib/server/catalog';
import { testFormSchema, formToTestInput, testInputToForm } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const detail = await testDetail(event.params.code);
	if (!detail) notFound('This test');
	return {
		...detail,
		form: await superValidate(testInputToForm(detail.test), zod4(testFormSchema)),
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

export const actions: Actions = {
	default: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(testFormSchema));
		if (!form.valid) return fail(400, { form });
		try {
			const r = await updateTest(event.params.code, formToTestInput(form.data), user.id);
			const text =
				r.outcome === 'version'
					? `Saved as version ${r.test.version}: a verified protocol used the previous version, which it keeps (changed: ${r.changed.join(', ')}).`
					: r.outcome === 'updated'
						? `Saved in place (changed: ${r.changed.join(', ')}).`
						: 'Nothing changed.';
			return message(form, text);
		} catch (e) {
			return formError(form, e);
		}
	}
};

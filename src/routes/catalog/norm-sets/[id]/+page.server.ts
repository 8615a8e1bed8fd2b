import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { formError, pageError } from '$lib/server/http';
import { superValidate, message } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole, idParam } from '$lib/server/guard';
import { normSetScreen, updateNormSet, addNormGroup, deleteNormGroup, ServiceError } from '$lib/server/catalog';
import { normGroupSchema, normSetSchema } from '$lib/catalog/schema';
import { groupWords } from '$lib/catalog/ranges';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const id = idParam(event.params.id, 'This norm set');
	let screen: Awaited<ReturnType<typeof normSetScreen>>;
	try {
		screen = await normSetScreen(id);
	} catch (e) {
		pageError(e);
	}
	const { set } = screen;
	return {
		...screen,
		test: event.url.searchParams.get('test') ?? '',
		metaForm: await superValidate(
			{
				code: set.code,
				name: set.name,
				source: set.source,
				version: set.version,
				borrow_days: set.age_rule.borrowDays === 'actual' ? 'actual' : '30',
				rounding: set.age_rule.rounding,
				covariate_age: set.covariate_age
			},
			zod4(normSetSchema),
			{ id: 'meta' }
		),
		groupForm: await superValidate(zod4(normGroupSchema), { id: 'group' }),
		canEdit: event.locals.user!.roles.includes('lead')
	};
};

export const actions: Actions = {
	meta: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(normSetSchema), { id: 'meta' });
		if (!form.valid) return fail(400, { metaForm: form });
		try {
			await updateNormSet(idParam(event.params.id), form.data, user.id);
			return message(form, 'Saved.');
		} catch (e) {
			return formError(form, e);
		}
	},
	group: async (event) => {
		const user = requireRole(event, 'lead');
		const form = await superValidate(event.request, zod4(normGroupSchema), { id: 'group' });
		if (!form.valid) return fail(400, { groupForm: form });
		try {
			const g = await addNormGroup(idParam(event.params.id), form.data, user.id);
			return message(form, `Added the group for ${groupWords(g)} of ${g.test_code}.`);
		} catch (e) {
			return formError(form, e);
		}
	},
	delete: async (event) => {
		const user = requireRole(event, 'lead');
		const groupId = Number((await event.request.formData()).get('group_id'));
		if (!Number.isInteger(groupId) || groupId <= 0) return fail(400, { deleteError: 'Unknown group.' });
		try {
			await deleteNormGroup(groupId, user.id);
			return { deleted: groupId };
		} catch (e) {
			if (e instanceof ServiceError) return fail(e.status === 409 ? 409 : 400, { deleteError: e.message });
			throw e;
		}
	}
};

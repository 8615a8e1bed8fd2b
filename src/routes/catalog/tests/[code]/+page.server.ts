import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { formError } from '$lib/server/http';
import { superValidate, message } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole, notFound } from '$lib/server/guard';
import { select } from '$lib/server/db';
import { getTest, testVersions, listDomains, updateTest } from '$lib/server/catalog';
import { testFormSchema, formToTestInput, testInputToForm } from '$lib/catalog/schema';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'lead', 'admin');
	const test = await getTest(event.params.code);
	if (!test) notFound('This test');
	const [versions, domains, norms] = await Promise.all([
		testVersions(test.code),
		listDomains(),
		select<{ id: number; name: string; version: string; groups: number; min: number; max: number }>(
			`SELECT s.id, s.name, s.version, COUNT(*) AS \`groups\`, MIN(g.age_min_months) AS min, MAX(g.age_max_months) AS max
			   FROM norm_groups g JOIN norm_sets s ON s.id = g.norm_set_id WHERE g.test_code = :code GROUP BY s.id ORDER BY s.name`,
			{ code: test.code }
		)
	]);
	return {
		test,
		versions,
		domains,
		norms: norms.map((n) => ({ ...n, groups: Number(n.groups) })),
		form: await superValidate(testInputToForm(test), zod4(testFormSchema)),
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

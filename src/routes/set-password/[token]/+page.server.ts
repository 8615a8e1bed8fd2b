import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { checkToken, useToken } from '$lib/server/users';
import { passwordSchema } from '$lib/validation/auth';
import { fieldMessages } from '$lib/validation/issues';

export const load: PageServerLoad = async ({ params }) => {
	const check = await checkToken(params.token);
	return check.ok ? { ok: true as const, email: check.email, purpose: check.purpose } : { ok: false as const, reason: check.reason };
};

export const actions: Actions = {
	default: async ({ params, request }) => {
		const parsed = passwordSchema.safeParse(Object.fromEntries(await request.formData()));
		if (!parsed.success) return fail(400, { errors: fieldMessages(parsed.error) });
		const result = await useToken(params.token, parsed.data.password);
		if (!result.ok) return fail(400, { errors: { form: result.reason } });
		redirect(303, '/signin?notice=password-set');
	}
};

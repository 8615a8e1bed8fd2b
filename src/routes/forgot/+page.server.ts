import type { Actions } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { emailField } from '$lib/validation/auth';
import { requestReset } from '$lib/server/people';

export const actions: Actions = {
	default: async ({ request }) => {
		const parsed = z.object({ email: emailField }).safeParse(Object.fromEntries(await request.formData()));
		if (!parsed.success) return fail(400, { error: 'Enter a valid e-mail address.' });
		await requestReset(parsed.data.email);
		redirect(303, '/signin?notice=reset-sent');
	}
};

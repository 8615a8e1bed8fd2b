import type { LayoutServerLoad } from './$types';
import { error } from '@sveltejs/kit';
import { navFor } from '$lib/roles';
import { config } from '$lib/server/config';

export const load: LayoutServerLoad = async ({ locals }) => {
	const user = locals.user;
	if (locals.denied) error(locals.denied.status, { message: locals.denied.message, code: 'forbidden' });
	return {
		user,
		nav: user ? navFor(user.roles, config.mailFakeUrl !== null) : [],
		mode: config.mode
	};
};

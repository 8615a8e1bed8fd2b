import type { LayoutServerLoad } from './$types';
import { navFor } from '$lib/roles';
import { config } from '$lib/server/config';

export const load: LayoutServerLoad = async ({ locals }) => {
	const user = locals.user;
	return {
		user,
		nav: user ? navFor(user.roles, config.mailFakeUrl !== null) : [],
		mode: config.mode,
		/** The clinic's time zone: every time on every page is shown in it. */
		timeZone: config.timeZone
	};
};

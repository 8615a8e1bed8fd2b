import type { Actions, PageServerLoad } from './$types';
import { redirect } from '@sveltejs/kit';
import { signOut } from '../../auth';

export const load: PageServerLoad = async () => redirect(303, '/signin');

export const actions: Actions = {
	default: async (event) => {
		// signOut reads redirectTo from the form; always land on the sign-in page.
		const form = new URLSearchParams({ redirectTo: '/signin?notice=signed-out' });
		const request = new Request(event.request.url, {
			method: 'POST',
			headers: { ...Object.fromEntries(event.request.headers), 'content-type': 'application/x-www-form-urlencoded' },
			body: form
		});
		return signOut({ ...event, request });
	}
};

import type { Actions, PageServerLoad } from './$types';
import { fail, redirect } from '@sveltejs/kit';
import { CredentialsSignin } from '@auth/sveltekit';
import { signIn } from '../../auth';
import { sameOriginPath } from '$lib/server/redirect';

const MESSAGES: Record<string, string> = {
	credentials: 'That e-mail and password do not match an active account.',
	throttled: 'Too many failed sign-ins for this account or address. Wait 15 minutes, or reset your password.',
	unavailable: 'Sign-in is unavailable right now (a service is not reachable). Try again in a minute.'
};

/** Only paths of this site may be returned to after sign-in (see $lib/server/redirect). */
function safeTarget(value: string | null): string {
	const path = sameOriginPath(value);
	return path.startsWith('/signin') ? '/' : path;
}

export const load: PageServerLoad = async ({ locals, url }) => {
	const redirectTo = safeTarget(url.searchParams.get('redirectTo') ?? url.searchParams.get('callbackUrl'));
	if (locals.user) redirect(303, redirectTo);
	const error = url.searchParams.get('error');
	const code = url.searchParams.get('code') ?? (error ? 'credentials' : null);
	return {
		redirectTo,
		message: code ? (MESSAGES[code] ?? MESSAGES.credentials) : null,
		notice: url.searchParams.get('notice')
	};
};

export const actions: Actions = {
	default: async (event) => {
		const form = await event.request.clone().formData();
		try {
			await signIn(event);
		} catch (e) {
			// Success is a redirect (rethrown); a refused sign-in is a CredentialsSignin with a code.
			if (e instanceof CredentialsSignin) {
				const code = MESSAGES[e.code] ? e.code : 'credentials';
				return fail(code === 'throttled' ? 429 : code === 'unavailable' ? 503 : 400, {
					message: MESSAGES[code],
					code,
					email: String(form.get('email') ?? '')
				});
			}
			throw e;
		}
	}
};

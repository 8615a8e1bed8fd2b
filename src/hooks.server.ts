import { sequence } from '@sveltejs/kit/hooks';
import { json, redirect, error, type Handle, type HandleServerError, type RequestEvent } from '@sveltejs/kit';
import { handle as authHandle } from './auth';
import { decide } from '$lib/server/access';
import { quickSession, sessionUser, SessionUnchecked } from '$lib/server/session';
import { dbRefusal, isDbUnavailable, closeDb } from '$lib/server/db';
import { unavailableJson } from '$lib/server/http';
import { closeRedis } from '$lib/server/redis';
import { compress } from '$lib/server/compress';
import errorTemplate from './error.html?raw';
import { createHash } from 'node:crypto';

const escapeHtml = (t: string) => t.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
/** The same page SvelteKit shows for errors outside the layout (src/error.html). */
const errorPage = (status: number, message: string) =>
	errorTemplate.replaceAll('%sveltekit.status%', String(status)).replaceAll('%sveltekit.error.message%', escapeHtml(message));
/**
 * The policy of that page: nothing but its own inline <style>, allowed by its hash (without it the
 * allow-nothing policy of endpoints below applied and the page showed unstyled).
 */
const ERROR_PAGE_CSP = (() => {
	const style = /<style>([\s\S]*?)<\/style>/.exec(errorTemplate)?.[1] ?? '';
	const hash = createHash('sha256').update(style, 'utf8').digest('base64');
	return `default-src 'none'; style-src 'sha256-${hash}'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'`;
})();
const errorResponse = (status: number, message: string) =>
	new Response(errorPage(status, message), { status, headers: { 'content-type': 'text/html; charset=utf-8', 'Content-Security-Policy': ERROR_PAGE_CSP } });

const isApi = (e: RequestEvent) => e.url.pathname.startsWith('/api/');
/** Route ids of the +server endpoints (found at build time; the modules are not loaded here). */
const ENDPOINTS = new Set(Object.keys(import.meta.glob('./routes/**/+server.ts')).map((k) => k.slice('./routes'.length, -'/+server.ts'.length) || '/'));
const SESSIONS_UNAVAILABLE = 'Your session cannot be checked right now (a service is not reachable). Nothing was saved; try again in a minute.';

/**
 * A body that claims to be a form but cannot be parsed (a broken multipart boundary, bad
 * percent-encoding) makes `request.formData()` throw a TypeError, which would surface as a 500 from
 * any action. Answer 400 instead; clones (the sign-in action reads one) are guarded too.
 */
function guardFormData(request: Request): Request {
	const formData = request.formData.bind(request);
	const clone = request.clone.bind(request);
	Object.defineProperty(request, 'formData', {
		value: async () => {
			try {
				return await formData();
			} catch (e) {
				if (e instanceof TypeError) error(400, { message: 'The form could not be read (malformed body). Reload the page and try again.', code: 'bad_form' });
				throw e;
			}
		}
	});
	Object.defineProperty(request, 'clone', { value: () => guardFormData(clone()) });
	return request;
}

/** Every request: who is signing in, and may they open this route with this method? */
const authorize: Handle = async ({ event, resolve }) => {
	event.locals.user = null;
	const routeId = event.route.id;
	if (routeId === null) {
		// no such route: a client of the API gets JSON, as from every other API answer; a page, SvelteKit's 404
		if (isApi(event)) return json({ message: 'There is nothing at this address of the API.', code: 'not_found' }, { status: 404 });
		return resolve(event);
	}

	let unchecked = false;
	try {
		// Most requests: the cookie is checked here with one Redis round trip and not re-issued; Auth.js's
		// full session path runs only when the token is due for re-issue or must be refused (session.ts).
		const write = event.request.method !== 'GET' && event.request.method !== 'HEAD';
		const quick = await quickSession(event.cookies, event.url.protocol === 'https:', write);
		if (quick.kind === 'user') event.locals.user = quick.user;
		else if (quick.kind === 'full') event.locals.user = await sessionUser(await event.locals.auth(), write);
	} catch (e) {
		if (e instanceof SessionUnchecked) unchecked = true;
		else {
			if (isDbUnavailable(e)) {
				event.locals.unavailable = true;
				if (isApi(event)) return unavailableJson(e);
				const r = dbRefusal(e);
				error(503, { message: r.message, code: r.code });
			}
			throw e;
		}
	}

	const decision = decide(routeId, event.request.method, event.locals.user?.roles ?? null);
	if (decision === 'allow') {
		guardFormData(event.request);
		return resolve(event);
	}
	if (decision === 'unknown-route') console.error(`[access] no rule for ${event.request.method} ${routeId}: refused`);
	if (decision === 'anonymous' && unchecked) {
		// Signed in, but whether the session was ended cannot be checked: refuse, keep the session.
		if (isApi(event) || event.request.method !== 'GET') return json({ message: SESSIONS_UNAVAILABLE, code: 'unavailable' }, { status: 503 });
		return errorResponse(503, SESSIONS_UNAVAILABLE);
	}
	if (decision === 'anonymous') {
		if (isApi(event)) return json({ message: 'Sign in first.', code: 'unauthenticated' }, { status: 401 });
		const back = event.url.pathname + event.url.search;
		redirect(303, `/signin?redirectTo=${encodeURIComponent(back)}`);
	}
	const message = decision === 'unknown-route' ? 'This address is not open to anyone yet.' : 'Your role does not include this screen or action.';
	// Endpoints (CSV downloads, scans), API routes and actions: a JSON refusal.
	if (isApi(event) || event.request.method !== 'GET' || ENDPOINTS.has(routeId)) return json({ message, code: 'forbidden' }, { status: 403 });
	// A page: the app's error page, answered here, so no load function or layout of it ever runs.
	return errorResponse(403, message);
};

/** Headers every response carries. The Content-Security-Policy comes from svelte.config.js. */
const headers: Handle = async ({ event, resolve }) => {
	const response = await resolve(event);
	const h = response.headers;
	// Scanned forms may be framed by our own review screen; nothing else may be framed at all.
	h.set('X-Frame-Options', /^\/protocols\/\d+\/attachments\//.test(event.url.pathname) ? 'SAMEORIGIN' : 'DENY');
	h.set('X-Content-Type-Options', 'nosniff');
	h.set('Referrer-Policy', 'same-origin');
	h.set('Permissions-Policy', 'camera=(), microphone=(), geolocation=(), payment=()');
	h.set('Cross-Origin-Opener-Policy', 'same-origin');
	if (event.url.protocol === 'https:') h.set('Strict-Transport-Security', 'max-age=31536000');
	if (!h.has('Cache-Control')) h.set('Cache-Control', 'no-store');
	// Pages carry SvelteKit's CSP (svelte.config.js); endpoints (JSON, CSV) get one that allows nothing.
	if (!h.has('Content-Security-Policy')) h.set('Content-Security-Policy', "default-src 'none'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'");
	if (event.locals.unavailable && response.status === 500) {
		return new Response(response.body, { status: 503, headers: h });
	}
	return response;
};

export const handle = sequence(compress, headers, authHandle, authorize);

/** Unexpected errors: log the detail on the server, never send a stack trace or SQL. */
export const handleError: HandleServerError = ({ error: e, event, status }) => {
	if (isDbUnavailable(e)) {
		event.locals.unavailable = true;
		const r = dbRefusal(e);
		return { message: r.message, code: r.code };
	}
	if (status !== 404) console.error(`[error] ${event.request.method} ${event.url.pathname}:`, e instanceof Error ? e.stack : e);
	return { message: status === 404 ? 'There is nothing at this address.' : 'Something went wrong on our side. It has been logged.', code: 'internal' };
};

let closing = false;
process.on('sveltekit:shutdown', async () => {
	if (closing) return;
	closing = true;
	await Promise.allSettled([closeDb(), closeRedis()]);
});

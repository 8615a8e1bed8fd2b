/**
 * The one adapter from service errors to answers: JSON for API routes (`api`, `apiError`), error
 * pages (`pageError`) or form failures (`actionError`) for pages; plus the one JSON body reader.
 * A database outage answers 503 with a plain message; anything else unexpected is left to
 * `handleError` (logged, a generic message, never a stack trace).
 */
import { error, fail, json } from '@sveltejs/kit';
import { message, setError, type SuperValidated } from 'sveltekit-superforms';
import { ServiceError } from './errors';
export { parseWith } from './errors';
import { dbRefusal, isDbUnavailable } from './db';

/** 503 for an outage or an overload (dbRefusal says which), with Retry-After. */
export function unavailableJson(e: unknown): Response {
	const r = dbRefusal(e);
	return json({ message: r.message, code: r.code }, { status: 503, headers: { 'Retry-After': String(r.retryAfter) } });
}

export function apiError(e: unknown): Response {
	if (e instanceof ServiceError)
		return json({ message: e.message, code: e.code, field: e.field ?? null, fields: e.fields, ...(e.detail ?? {}) }, { status: e.status });
	if (isDbUnavailable(e)) return unavailableJson(e);
	throw e;
}

/** Run an endpoint body; service refusals become 4xx JSON, an outage 503. */
export async function api(fn: () => Promise<Response>): Promise<Response> {
	try {
		return await fn();
	} catch (e) {
		return apiError(e);
	}
}

export function pageError(e: unknown): never {
	if (e instanceof ServiceError) error(e.status, { message: e.message, code: e.code });
	throw e;
}

export function actionError(e: unknown, action: string) {
	if (e instanceof ServiceError) return fail(e.status, { action, message: e.message, field: e.field ?? null, fields: e.fields });
	throw e;
}

/** Read a JSON body: 415 when it says it is something else, 413 when too large, 400 when not JSON. */
export async function readJson(request: Request): Promise<unknown> {
	const type = request.headers.get('content-type');
	if (type && !/^application\/(?:[\w.+-]+\+)?json\b/i.test(type.trim()))
		throw new ServiceError(415, 'Send a JSON body (Content-Type: application/json).', 'body', 'bad_request');
	let text: string;
	try {
		text = await request.text();
	} catch {
		throw new ServiceError(413, 'The request body is too large.', 'body', 'too_large');
	}
	try {
		return JSON.parse(text);
	} catch {
		throw new ServiceError(400, 'The request body is not valid JSON.', 'body', 'bad_request');
	}
}

/**
 * A superforms action's refusal: each field message set on its field (when the form has it), the
 * whole message above the form, the service's status (400 for anything but a 409/413).
 */
export function formError<T extends Record<string, unknown>>(form: SuperValidated<T>, e: unknown) {
	if (!(e instanceof ServiceError)) throw e;
	for (const [k, m] of Object.entries(e.fields)) if (k in form.data) setError(form, k as never, m);
	return message(form, `Not saved: ${e.message}`, { status: e.status === 409 || e.status === 413 ? e.status : 400 });
}

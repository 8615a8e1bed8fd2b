/**
 * The one error type of the services. A service refuses with a status, a message for the user,
 * optionally the field(s) at fault, a machine code and extra data for the answer (e.g. the norm
 * groups to choose from, an import preview). `http.ts` turns it into a JSON answer, an error page
 * or a form failure; nothing else in the app catches it by type.
 */
import type { z } from 'zod';
import { fieldMessages, pathMessages } from '../validation/issues';

export type ServiceStatus = 400 | 403 | 404 | 409 | 413 | 415 | 422;

const DEFAULT_CODE: Record<ServiceStatus, string> = {
	400: 'invalid',
	403: 'forbidden',
	404: 'not_found',
	409: 'conflict',
	413: 'too_large',
	415: 'unsupported_type',
	422: 'unprocessable'
};

export class ServiceError extends Error {
	/** Messages by field (form field or dotted body path); `{}` when the refusal is about the whole request. */
	readonly fields: Record<string, string>;
	/** The first field at fault, if any (forms focus it). */
	readonly field: string | undefined;
	readonly code: string;

	constructor(
		public status: ServiceStatus,
		message: string,
		/** One field name (its message is `message`), or messages by field. */
		field?: string | Record<string, string>,
		code?: string,
		public detail?: Record<string, unknown>
	) {
		super(message);
		this.name = 'ServiceError';
		this.fields = typeof field === 'string' ? { [field]: message } : (field ?? {});
		this.field = typeof field === 'string' ? field : Object.keys(this.fields)[0];
		this.code = code ?? DEFAULT_CODE[status];
	}
}

/** An object the user may not see, or that does not exist (the two are not told apart). */
export const notFound = (what = 'This protocol') => new ServiceError(404, `${what} does not exist or is not assigned to you.`, undefined, 'not_found');
/** A catalog entry that does not exist (the catalog is visible to every lead, so no "assigned"). */
export const notFoundError = (what: string) => new ServiceError(404, `${what} does not exist.`, undefined, 'not_found');
export const conflict = (message: string) => new ServiceError(409, message, undefined, 'conflict');
export const invalid = (message: string, field?: string) => new ServiceError(400, message, field, 'invalid');

/**
 * Check input against a schema, or refuse with 400 and a message per field: by dotted path
 * (`groups.0.sd`, JSON bodies) or by top-level field (`field`, forms).
 */
export function parseWith<S extends z.ZodType>(schema: S, input: unknown, keys: 'path' | 'field' = 'path'): z.output<S> {
	const p = schema.safeParse(input);
	if (!p.success) throw new ServiceError(400, 'Some fields need correcting.', keys === 'path' ? pathMessages(p.error) : fieldMessages(p.error));
	return p.data;
}

/** Check input against a schema, or refuse with 400 naming the first problem by its path (`scores.A.raw: …`). */
export function parseFirst<S extends z.ZodType>(schema: S, input: unknown, opts: { prefix?: string; field?: string } = {}): z.output<S> {
	const p = schema.safeParse(input);
	if (p.success) return p.data;
	const i = p.error.issues[0];
	const path = [...(opts.prefix ? [opts.prefix] : []), ...i.path.map(String)].join('.');
	throw invalid(`${path || 'body'}: ${i.message}`, opts.field ?? String(i.path[0] ?? 'body'));
}

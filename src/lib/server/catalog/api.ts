/** JSON API plumbing for the catalog routes: body parsing and error answers (never a 500 on bad input). */
import { json } from '@sveltejs/kit';
import type { z } from 'zod';
import { CatalogError } from './errors';

export async function readJson(request: Request): Promise<unknown> {
	const type = request.headers.get('content-type') ?? '';
	if (!type.includes('application/json')) throw new CatalogError(400, 'Send a JSON body (Content-Type: application/json).', {}, 'bad_request');
	let text: string;
	try {
		text = await request.text();
	} catch {
		throw new CatalogError(413, 'The request body is too large.', {}, 'too_large');
	}
	try {
		return JSON.parse(text);
	} catch {
		throw new CatalogError(400, 'The body is not valid JSON.', {}, 'bad_request');
	}
}

export function parseWith<S extends z.ZodType>(schema: S, body: unknown): z.output<S> {
	const p = schema.safeParse(body);
	if (!p.success) {
		const fields: Record<string, string> = {};
		for (const i of p.error.issues) fields[i.path.map(String).join('.') || 'form'] ??= i.message;
		throw new CatalogError(400, 'Some fields need correcting.', fields);
	}
	return p.data;
}

/** Run an endpoint body; catalog refusals become 4xx JSON with field messages. */
export async function api(fn: () => Promise<Response>): Promise<Response> {
	try {
		return await fn();
	} catch (e) {
		if (e instanceof CatalogError) return json({ message: e.message, code: e.code, fields: e.fields, ...(e.detail ?? {}) }, { status: e.status });
		throw e;
	}
}

export function idOf(v: string | undefined): number {
	const n = Number(v);
	if (!Number.isInteger(n) || n <= 0 || n > 2 ** 31) throw new CatalogError(404, 'There is nothing at this address.', {}, 'not_found');
	return n;
}

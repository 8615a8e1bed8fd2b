/** Turning service errors into responses: JSON for API routes, error pages or form failures for pages. */
import { error, fail, json } from '@sveltejs/kit';
import { WorkflowError } from './protocols/errors';
import { isDbUnavailable } from './db';

export function apiError(e: unknown): Response {
	if (e instanceof WorkflowError) return json({ message: e.message, code: e.code, field: e.field ?? null }, { status: e.status });
	if (isDbUnavailable(e))
		return json({ message: 'The database cannot be reached right now. Nothing was saved; try again in a minute.', code: 'unavailable' }, { status: 503 });
	throw e;
}

export function pageError(e: unknown): never {
	if (e instanceof WorkflowError) error(e.status, { message: e.message, code: e.code });
	throw e;
}

export function actionError(e: unknown, action: string) {
	if (e instanceof WorkflowError) return fail(e.status, { action, message: e.message, field: e.field ?? null });
	throw e;
}

/** Read a JSON body, answering 400 (not 500) when it is not JSON. */
export async function readJson(request: Request): Promise<unknown> {
	try {
		return await request.json();
	} catch {
		throw new WorkflowError(400, 'The request body must be JSON.', 'body', 'invalid');
	}
}

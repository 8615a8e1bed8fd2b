import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { confirmImport } from '$lib/server/catalog';
import { api, parseWith, readJson } from '$lib/server/http';
import { importConfirmSchema } from '$lib/catalog/schema';

/**
 * Body { kind: "tests", csv } or { kind: "norms", csv, target: { mode: "new", set: {...} } | { mode: "existing", id } }.
 * The file is validated again here; any problem answers 422 with the preview and writes nothing.
 */
export const POST: RequestHandler = (event) =>
	api(async () => {
		const user = requireRole(event, 'lead');
		const req = parseWith(importConfirmSchema, await readJson(event.request));
		return json({ imported: await confirmImport(req, user.id) });
	});

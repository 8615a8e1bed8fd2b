import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { previewImport } from '$lib/server/catalog';
import { api, parseWith, readJson } from '$lib/server/http';
import { importPreviewSchema } from '$lib/catalog/schema';

/** Body { kind: "norms"|"tests", csv }: the preview (column mapping, first rows, every bad row). Writes nothing. */
export const POST: RequestHandler = (event) =>
	api(async () => {
		requireRole(event, 'lead');
		const { kind, csv } = parseWith(importPreviewSchema, await readJson(event.request));
		const preview = await previewImport(kind, csv);
		return json({ preview, ok: preview.fileErrors.length === 0 && preview.errorCount === 0 });
	});

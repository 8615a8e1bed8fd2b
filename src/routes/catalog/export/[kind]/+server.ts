import type { RequestHandler } from './$types';
import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { contentDisposition } from '$lib/server/filenames';
import { exportNormGroupsCsv, exportTestsCsv, ServiceError } from '$lib/server/catalog';

/** /catalog/export/tests and /catalog/export/{norms,tables,equations}?set=<id>: the same CSV layouts the import reads. */
export const GET: RequestHandler = async (event) => {
	requireRole(event, 'lead', 'admin');
	const csvResponse = (csv: string, filename: string) =>
		new Response(csv, {
			headers: { 'content-type': 'text/csv; charset=utf-8', 'content-disposition': contentDisposition('attachment', filename, 'export.csv') }
		});
	if (event.params.kind === 'tests') return csvResponse(await exportTestsCsv(), 'crosstally-tests.csv');
	const kind = event.params.kind;
	if (kind === 'norms' || kind === 'tables' || kind === 'equations') {
		const id = Number(event.url.searchParams.get('set'));
		if (!Number.isInteger(id) || id <= 0) error(404, { message: 'Choose a norm set to export.', code: 'not_found' });
		try {
			const { filename, csv } = await exportNormGroupsCsv(id, kind);
			return csvResponse(csv, filename);
		} catch (e) {
			if (e instanceof ServiceError) error(404, { message: e.message, code: 'not_found' });
			throw e;
		}
	}
	error(404, { message: 'There is nothing at this address.', code: 'not_found' });
};

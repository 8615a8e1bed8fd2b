/**
 * GET /api/v1/audit/{report}?from&to&scorer&battery&test&kind&field&format=csv — the Audit
 * screen's tables (leads only; the access table enforces the role). Unknown report: 404 JSON.
 * Bad filter values: 400 with one message per field.
 */
import { json } from '@sveltejs/kit';
import type { RequestHandler } from './$types';
import { isReport, parseFilters, REPORT_NAMES, runReport, toCsv } from '$lib/server/audit-stats';
import { contentDisposition } from '$lib/server/filenames';

export const GET: RequestHandler = async ({ params, url }) => {
	if (!isReport(params.report)) {
		return json(
			{ message: `There is no audit report "${params.report}". Reports: ${REPORT_NAMES.join(', ')}.`, code: 'not_found', reports: REPORT_NAMES },
			{ status: 404 }
		);
	}
	const parsed = parseFilters(url.searchParams);
	if (!parsed.ok) {
		return json({ message: 'Some filters are not valid.', code: 'invalid', errors: parsed.errors }, { status: 400 });
	}
	const result = await runReport(params.report, parsed.filters);
	if (parsed.format === 'csv') {
		const day = new Date().toISOString().slice(0, 10);
		return new Response(toCsv(result), {
			headers: {
				'content-type': 'text/csv; charset=utf-8',
				'content-disposition': contentDisposition('attachment', `crosstally-audit-${params.report}-${day}.csv`, 'audit.csv')
			}
		});
	}
	return json(result);
};

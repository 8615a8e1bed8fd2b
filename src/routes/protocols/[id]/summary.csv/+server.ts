import type { RequestHandler } from './$types';
import { requireUser, idParam } from '$lib/server/guard';
import { protocolSummary, summaryCsv } from '$lib/server/protocols/summary';
import { pageError } from '$lib/server/http';
import { contentDisposition } from '$lib/server/filenames';

export const GET: RequestHandler = async (event) => {
	const user = requireUser(event);
	try {
		const s = await protocolSummary(idParam(event.params.id, 'This protocol'), user);
		return new Response(summaryCsv(s), {
			headers: {
				'content-type': 'text/csv; charset=utf-8',
				'content-disposition': contentDisposition('attachment', `summary-${s.protocol.code.replace(/[^\w.-]/g, '_')}.csv`, 'summary.csv')
			}
		});
	} catch (e) {
		pageError(e);
	}
};

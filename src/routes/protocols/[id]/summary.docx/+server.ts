import type { RequestHandler } from './$types';
import { requireUser, idParam } from '$lib/server/guard';
import { protocolSummary } from '$lib/server/protocols/summary';
import { summaryDocx, DOCX_TYPE } from '$lib/server/protocols/report';
import { pageError } from '$lib/server/http';

export const GET: RequestHandler = async (event) => {
	const user = requireUser(event);
	try {
		const s = await protocolSummary(idParam(event.params.id, 'This protocol'), user);
		const body = await summaryDocx(s);
		return new Response(new Uint8Array(body), {
			headers: {
				'content-type': DOCX_TYPE,
				'content-disposition': `attachment; filename="summary-${s.protocol.code.replace(/[^\w.-]/g, '_')}.docx"`
			}
		});
	} catch (e) {
		pageError(e);
	}
};

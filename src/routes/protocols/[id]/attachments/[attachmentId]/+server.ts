import type { RequestHandler } from './$types';
import { requireUser, idParam } from '$lib/server/guard';
import { readAttachment } from '$lib/server/protocols/attachments';
import { pageError } from '$lib/server/http';
import { contentDisposition } from '$lib/server/filenames';

export const GET: RequestHandler = async (event) => {
	const user = requireUser(event);
	try {
		const a = await readAttachment(idParam(event.params.id), idParam(event.params.attachmentId, 'This attachment'), user);
		return new Response(new Uint8Array(a.bytes), {
			headers: {
				'content-type': a.mime,
				'content-disposition': contentDisposition('inline', a.filename, 'record-form'),
				'x-content-type-options': 'nosniff',
				'cache-control': 'private, no-store',
				etag: `"${a.sha256}"`,
				// Same-origin framing only, so the review screen can show the scan beside the list.
				'content-security-policy': "default-src 'none'; img-src 'self'; style-src 'unsafe-inline'; frame-ancestors 'self'"
			}
		});
	} catch (e) {
		pageError(e);
	}
};

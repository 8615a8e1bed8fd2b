/**
 * gzip for dynamic responses (pages, JSON, CSV). Static files are served precompressed by
 * adapter-node (precompress: true) before the hooks run, so they never come here.
 * Streamed, so SvelteKit's streamed page data keeps streaming. Skipped for bodies known to be
 * under 1 KB, anything already encoded, HEAD, and types that are compressed already (scans, PDFs).
 * BREACH: no response carries a secret that is also reflected from the request (sessions are in
 * cookies, there are no CSRF tokens in pages; the CSP nonce changes every response).
 */
import type { Handle } from '@sveltejs/kit';

const COMPRESSIBLE = /^(text\/(html|csv|plain|css|javascript)|application\/(json|javascript|xml)|image\/svg\+xml)/;
const MIN_BYTES = 1024;

export function gzipResponse(request: Request, response: Response): Response {
	if (!response.body || request.method === 'HEAD' || response.status === 204 || response.status === 304) return response;
	const h = response.headers;
	if (h.has('Content-Encoding') || !COMPRESSIBLE.test(h.get('Content-Type') ?? '')) return response;
	if (!/\bgzip\b/i.test(request.headers.get('Accept-Encoding') ?? '')) return response;
	const length = h.get('Content-Length');
	if (length !== null && Number(length) < MIN_BYTES) return response;
	const headers = new Headers(h);
	headers.delete('Content-Length');
	headers.set('Content-Encoding', 'gzip');
	headers.append('Vary', 'Accept-Encoding');
	return new Response(response.body.pipeThrough(new CompressionStream('gzip')), { status: response.status, statusText: response.statusText, headers });
}

export const compress: Handle = async ({ event, resolve }) => gzipResponse(event.request, await resolve(event));

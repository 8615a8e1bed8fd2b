/**
 * File names that reach a user: an upload's display name, a download's Content-Disposition.
 *
 * Bidirectional controls are removed: a right-to-left override (U+202E) makes
 * `invoice\u202Efdp.exe` display as `invoiceexe.pdf`; the embeddings, isolates and marks
 * (U+202A–U+202E, U+2066–U+2069, U+200E, U+200F, U+061C) can reorder a name the same way. Also
 * removed: path parts, control characters, zero-width characters and the byte-order mark, and the
 * characters Windows or a header cannot hold (`" < > | : * ?`).
 */
const BIDI = /[\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]/g;
// eslint-disable-next-line no-control-regex -- control characters are what this removes
const INVISIBLE = /[\u0000-\u001f\u007f-\u009f\u200b-\u200d\u2028\u2029\ufeff]/g;

export function stripBidi(s: string): string {
	return s.replace(BIDI, '');
}

/** A display name without any path, control, bidi or quoting characters; `fallback` when nothing is left. */
export function cleanFilename(name: string, fallback: string): string {
	const base = name.split(/[\\/]/).pop() ?? '';
	const clean = stripBidi(base)
		.replace(INVISIBLE, '')
		.replace(/["<>|:*?]/g, '')
		.replace(/^\.+/, '')
		.trim()
		.slice(0, 120);
	return clean || fallback;
}

/**
 * A Content-Disposition value: an ASCII `filename` (other characters as `_`) for old clients and
 * the cleaned UTF-8 name as `filename*` (RFC 6266 / RFC 5987).
 */
export function contentDisposition(type: 'inline' | 'attachment', name: string, fallback = 'download'): string {
	const clean = cleanFilename(name, fallback);
	const ascii = clean.replace(/[^\w.\- ]/g, '_');
	const encoded = encodeURIComponent(clean).replace(/['()*]/g, (c) => `%${c.charCodeAt(0).toString(16).toUpperCase()}`);
	return `${type}; filename="${ascii}"; filename*=UTF-8''${encoded}`;
}

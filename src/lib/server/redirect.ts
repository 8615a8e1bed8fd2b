/**
 * Where a sign-in may send the browser afterwards: a path on this site, never another origin.
 *
 * Browsers read `\` as `/` and drop tabs and newlines inside a URL, so `/\evil.example`,
 * `/<tab>/evil.example` or `/\/evil.example` in a Location header all lead to `//evil.example`, another
 * site. So a target is refused (the fallback is used) when it does not start with one `/`, holds a
 * backslash or any control character, or resolves to another origin; what is followed is the
 * normalised path, query and fragment only.
 */
const PROBE = 'http://same-origin.invalid';

export function sameOriginPath(value: string | null | undefined, fallback = '/'): string {
	if (!value || value.length > 2000) return fallback;
	// eslint-disable-next-line no-control-regex -- a control character in a redirect target refuses it
	if (/[\u0000-\u001f\u007f-\u009f\\]/.test(value)) return fallback;
	if (!value.startsWith('/') || value.startsWith('//')) return fallback;
	let u: URL;
	try {
		u = new URL(value, PROBE);
	} catch {
		return fallback;
	}
	if (u.origin !== PROBE) return fallback;
	const path = u.pathname + u.search + u.hash;
	if (!path.startsWith('/') || path.startsWith('//')) return fallback;
	return path;
}

/**
 * Auth.js's redirect callback: `url` may be a path or an absolute address (the callback-url cookie,
 * a form field). Only a path of this site survives, made absolute on `baseUrl`.
 */
export function authRedirect({ url, baseUrl }: { url: string; baseUrl: string }): string {
	let path: string | null = null;
	if (url.startsWith('/')) path = url;
	else {
		try {
			const u = new URL(url);
			if (u.origin === new URL(baseUrl).origin) path = u.pathname + u.search + u.hash;
		} catch {
			path = null;
		}
	}
	return `${new URL(baseUrl).origin}${sameOriginPath(path)}`;
}

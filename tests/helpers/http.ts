/**
 * A small HTTP client for integration tests against the running app (started by npm test):
 * keeps cookies, signs in through the real sign-in form, sends the Origin header SvelteKit checks.
 */
export const BASE_URL = process.env.ORIGIN ?? 'http://localhost:3010';
export const DEMO_PASSWORD = 'crosstally-demo';

export const ACCOUNTS = {
	scorer: 'sam.scorer@demo.crosstally.test',
	scorer2: 'rae.scorer@demo.crosstally.test',
	scorer3: 'kit.scorer@demo.crosstally.test',
	reviewer: 'rita.reviewer@demo.crosstally.test',
	lead: 'lee.lead@demo.crosstally.test',
	admin: 'ada.admin@demo.crosstally.test'
} as const;

export class Client {
	cookies = new Map<string, string>();
	/** origin: the Origin header to send (defaults to the base URL's origin; differs behind a proxy). */
	constructor(
		public base = BASE_URL,
		public origin = new URL(base).origin
	) {}

	private cookieHeader() {
		return [...this.cookies].map(([k, v]) => `${k}=${v}`).join('; ');
	}

	async request(path: string, init: RequestInit & { json?: unknown; form?: Record<string, string | string[]> } = {}): Promise<Response> {
		const headers = new Headers(init.headers);
		headers.set('origin', this.origin);
		if (this.cookies.size) headers.set('cookie', this.cookieHeader());
		let body = init.body;
		if (init.json !== undefined) {
			headers.set('content-type', 'application/json');
			body = JSON.stringify(init.json);
		} else if (init.form) {
			const p = new URLSearchParams();
			for (const [k, v] of Object.entries(init.form)) for (const x of Array.isArray(v) ? v : [v]) p.append(k, x);
			headers.set('content-type', 'application/x-www-form-urlencoded');
			body = p;
		}
		const res = await fetch(new URL(path, this.base), { ...init, headers, body, redirect: 'manual' });
		this.lastSetCookies = res.headers.getSetCookie();
		for (const c of this.lastSetCookies) {
			const [pair] = c.split(';');
			const i = pair.indexOf('=');
			const name = pair.slice(0, i).trim();
			const value = pair.slice(i + 1).trim();
			if (!value || /max-age=0/i.test(c) || /expires=thu, 01 jan 1970/i.test(c)) this.cookies.delete(name);
			else this.cookies.set(name, value);
		}
		return res;
	}

	get(path: string) {
		return this.request(path);
	}

	/** A SvelteKit form action: answers JSON when asked with x-sveltekit-action. */
	async action(path: string, form: Record<string, string | string[]>) {
		const res = await this.request(path, { method: 'POST', form, headers: { 'x-sveltekit-action': 'true', accept: 'application/json' } });
		return { status: res.status, body: (await res.json()) as { type: string; status?: number; data?: string; location?: string } };
	}

	/** Set-Cookie headers of the last response, as sent (for cookie attribute checks). */
	lastSetCookies: string[] = [];

	async signIn(email: string, password = DEMO_PASSWORD): Promise<boolean> {
		const r = await this.action('/signin', { providerId: 'credentials', email, password, redirectTo: '/' });
		return r.body.type === 'redirect';
	}
}

export async function signedIn(who: keyof typeof ACCOUNTS | string): Promise<Client> {
	const c = new Client();
	const email = who in ACCOUNTS ? ACCOUNTS[who as keyof typeof ACCOUNTS] : who;
	if (!(await c.signIn(email))) throw new Error(`could not sign in as ${email}`);
	return c;
}

/** Read the local mail fake's catch. */
export const MAILFAKE_URL = process.env.MAILFAKE_URL ?? 'http://127.0.0.1:2536';
export async function caughtMail(
	to?: string
): Promise<
	{ id: string; subject: string; to: string; cc: string; text: string; html: string | null; headers: Record<string, string>; envelope: { to: string[] } }[]
> {
	const res = await fetch(`${MAILFAKE_URL}/messages${to ? `?to=${encodeURIComponent(to)}` : ''}`);
	return res.json();
}

export async function waitFor<T>(fn: () => Promise<T | null | undefined | false>, timeoutMs = 15_000, stepMs = 200): Promise<T> {
	const end = Date.now() + timeoutMs;
	for (;;) {
		const v = await fn();
		if (v) return v;
		if (Date.now() > end) throw new Error(`timed out after ${timeoutMs} ms`);
		await new Promise((r) => setTimeout(r, stepMs));
	}
}

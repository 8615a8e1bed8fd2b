/**
 * The signed-in user of a request. Every request checks, without a database read (issue 18):
 *   - the Auth.js session cookie (an encrypted JWT), decoded here with Auth.js's own `decode`, once per
 *     cookie value (`decodeCached`: the same value comes back unchanged until its re-issue);
 *   - in one Redis round trip: the session epoch and the sign-out deny-list (revocation.ts) and the
 *     account's cached state (user-cache.ts: active, session version, roles), so deactivation,
 *     "end all sessions", a new password, a role change and sign-out take effect at the next request.
 * The token is re-issued (Auth.js's full session path, which slides the idle expiry) only when it was
 * last verified more than `refreshAfterMs()` ago — min(60 s, a tenth of the idle period) — instead of on
 * every request. Trade-off: the idle logoff counts from the last *re-issue*, so a session can end up to
 * that much earlier than SESSION_IDLE_MINUTES after its last request (at most 60 s with the default 30 min).
 * Redis unreachable: SessionUnchecked, which the hook answers 503 (fail closed, like sign-in).
 * Writes (any method but GET and HEAD) read the account from the database all the same (`fresh`):
 * they use the database anyway, and a database outage then answers 503 before a form is validated.
 */
import type { Session } from '@auth/sveltekit';
import type { Cookies } from '@sveltejs/kit';
import { decode } from '@auth/core/jwt';
import { config } from './config';
import { getUser } from './users';
import { redis } from './redis';
import { sessionCheck } from './revocation';
import { currentEntry, storeEntry, genKey, stateKey, type CachedUser } from './user-cache';

/** The session could not be checked against the sign-out deny-list (Redis unreachable). */
export class SessionUnchecked extends Error {
	constructor() {
		super('The session could not be checked (Redis unreachable).');
	}
}

type LocalsUser = App.Locals['user'];

/** How long a verified token is used as it is before the full Auth.js path re-issues it. */
export const refreshAfterMs = () => Math.min(60_000, (config.sessionIdleMinutes * 60_000) / 10);

/**
 * The account's state: from Redis when the cached entry is current, else from the database (and
 * then stored). `pre` is the generation and entry already read in the session check's round trip.
 */
export async function accountState(uid: number, pre?: { gen: string | null; entry: string | null }, fresh = false): Promise<CachedUser | null> {
	let gen: string | null, entry: string | null;
	if (pre) ({ gen, entry } = pre);
	else {
		try {
			[gen, entry] = await redis().mget(genKey(uid), stateKey(uid));
		} catch {
			throw new SessionUnchecked();
		}
	}
	const hit = fresh ? null : currentEntry(gen, entry);
	if (hit) return hit;
	const u = await getUser(uid);
	if (!u) return null;
	const state: CachedUser = { id: u.id, name: u.name, email: u.email, roles: u.roles, active: u.active, sv: u.session_version };
	await storeEntry(gen, state).catch(() => undefined); // only an optimisation: the next request reads the database again
	return state;
}

/** A deactivated account, or one whose sessions were ended (password set, deactivated), is anonymous. */
function toLocals(state: CachedUser | null, sv: unknown): LocalsUser {
	if (!state || !state.active || state.sv !== sv) return null;
	return { id: state.id, name: state.name, email: state.email, roles: state.roles };
}

/** After Auth.js's full session path (`event.locals.auth()`). */
export async function sessionUser(session: Session | null, fresh = false): Promise<LocalsUser> {
	const uid = session?.user?.uid;
	if (!uid) return null;
	if (session.user.checked === false) throw new SessionUnchecked();
	return toLocals(await accountState(uid, undefined, fresh), session.user.sv);
}

/**
 * Tokens already decoded, by cookie name and value. Decoding (HKDF of the secret, the key's thumbprint,
 * AES + HMAC, several of them through the crypto thread pool) cost about 1 ms of CPU and 2–4 ms of wall
 * time per request on the bench machine, as much as the rest of a signed-in `/health`; the same cookie
 * is sent unchanged until its re-issue, so each value is decoded once. An entry is only a decoded copy
 * of what the cookie holds: the checks after it (refresh point, deny-list, account state) run on every
 * request as before, and an entry is dropped once its token is due for re-issue or expired. Only
 * tokens that decoded (made with AUTH_SECRET) are kept, at most DECODED_MAX (oldest dropped first).
 */
const decoded = new Map<string, Record<string, unknown>>();
const DECODED_MAX = 5000;

async function decodeCached(name: string, raw: string): Promise<Record<string, unknown> | null> {
	const key = `${name}=${raw}`;
	const now = Date.now();
	const current = (x: Record<string, unknown>) =>
		typeof x.seen === 'number' && now - x.seen <= refreshAfterMs() && typeof x.exp === 'number' && x.exp * 1000 > now;
	const hit = decoded.get(key);
	if (hit && current(hit)) return hit;
	if (hit) decoded.delete(key); // due for re-issue or expired: decoded again, and Auth.js decides
	const token = await decode({ token: raw, secret: process.env.AUTH_SECRET ?? '', salt: name });
	if (token && current(token)) {
		if (decoded.size >= DECODED_MAX) decoded.delete(decoded.keys().next().value!);
		decoded.set(key, token);
	}
	return token;
}

export type QuickSession = { kind: 'none' } | { kind: 'full' } | { kind: 'user'; user: LocalsUser };

/**
 * The fast path: 'none' when there is no session cookie (anonymous, Auth.js is not asked), 'full'
 * when Auth.js must run (token due for re-issue, revoked, unreadable, chunked, expired), else the
 * user (null when deactivated or the session version moved on).
 */
export async function quickSession(cookies: Cookies, secure: boolean, fresh = false): Promise<QuickSession> {
	const name = `${secure ? '__Secure-' : ''}authjs.session-token`;
	const raw = cookies.get(name);
	if (!raw) return cookies.getAll().some((c) => c.name.startsWith(name)) ? { kind: 'full' } : { kind: 'none' };
	let token: Record<string, unknown> | null;
	try {
		token = await decodeCached(name, raw);
	} catch {
		return { kind: 'full' }; // Auth.js removes a cookie it cannot read
	}
	if (!token) return { kind: 'full' };
	const { seen, uid, sid, ep, sv } = token;
	if (typeof seen !== 'number' || typeof uid !== 'number' || Date.now() - seen > refreshAfterMs()) return { kind: 'full' };
	const check = await sessionCheck(sid, ep, uid);
	if (check.state === 'unknown') throw new SessionUnchecked();
	if (check.state === 'revoked') return { kind: 'full' }; // Auth.js's jwt callback refuses it and clears the cookie
	return { kind: 'user', user: toLocals(await accountState(uid, check, fresh), sv) };
}

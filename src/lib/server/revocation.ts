/**
 * Ending sessions (sign-out) with JWT sessions, across every app server: a deny-list in the shared
 * Redis, keyed by the session id (`sid`) that sign-in puts in the token and every refresh of the
 * token carries on (Auth.js gives each re-issued token a new `jti`, so the `jti` alone would leave
 * the earlier cookies of the same session usable).
 *
 * - Sign-out writes `ct:session:revoked:<sid>` with a TTL of the idle period plus a minute. That is
 *   long enough: a token is refused once it has not been *verified* for the idle period (`seen` is
 *   only moved forward after this check passes), so no token of a revoked session outlives the key.
 * - Redis here keeps nothing across a restart (no persistence), which would forget every
 *   revocation. So sign-in also stamps the token with the current *epoch* (`ct:session:epoch`, set
 *   once when missing); after a restart or a flush the epoch is new and every older token is
 *   refused: a lost deny-list ends all sessions rather than reviving revoked ones.
 * - Redis unreachable: the state is 'unknown'; the caller refuses the request (503) without
 *   ending the session, and does not refresh it.
 */
import { randomUUID } from 'node:crypto';
import { config } from './config';
import { redis } from './redis';
import { genKey, stateKey } from './user-cache';

const EPOCH_KEY = 'ct:session:epoch';
const revokedKey = (sid: string) => `ct:session:revoked:${sid}`;

/** Seconds a revocation is kept: the idle period (the longest an unverified token lives) plus a minute. */
export const revocationTtlSeconds = () => Math.ceil(config.sessionIdleMinutes * 60) + 60;

/** The current epoch, created when missing (first start, or Redis restarted or flushed). */
export async function sessionEpoch(): Promise<string> {
	const client = redis();
	const current = await client.get(EPOCH_KEY);
	if (current) return current;
	await client.set(EPOCH_KEY, `${Date.now()}-${randomUUID().slice(0, 8)}`, 'NX');
	const now = await client.get(EPOCH_KEY);
	if (!now) throw new Error('session epoch could not be set');
	return now;
}

/** A new session id and the epoch it belongs to (at sign-in). */
export async function newSession(): Promise<{ sid: string; ep: string }> {
	return { sid: randomUUID(), ep: await sessionEpoch() };
}

export type SessionState = 'ok' | 'revoked' | 'unknown';

/** Is this session still valid? One round trip in the normal case. */
export async function sessionState(sid: unknown, ep: unknown): Promise<SessionState> {
	return (await sessionCheck(sid, ep, null)).state;
}

/**
 * The session's state and, in the same round trip, the account's cached state (user-cache.ts) when
 * `uid` is given: `gen` and `entry` as read from Redis, for `accountState`.
 */
export async function sessionCheck(sid: unknown, ep: unknown, uid: number | null): Promise<{ state: SessionState; gen: string | null; entry: string | null }> {
	if (typeof sid !== 'string' || typeof ep !== 'string') return { state: 'revoked', gen: null, entry: null }; // a token from before sessions had ids
	try {
		const keys = [EPOCH_KEY, revokedKey(sid), ...(uid === null ? [] : [genKey(uid), stateKey(uid)])];
		const [epoch, revoked, gen = null, entry = null] = await redis().mget(...keys);
		if (revoked) return { state: 'revoked', gen, entry };
		if (epoch === null) {
			await sessionEpoch(); // the deny-list was lost: start a new epoch; this token is from the old one
			return { state: 'revoked', gen, entry };
		}
		return { state: epoch === ep ? 'ok' : 'revoked', gen, entry };
	} catch {
		return { state: 'unknown', gen: null, entry: null };
	}
}

/** Sign-out: refuse every token of this session from now on, on every app server. */
export async function revokeSession(sid: string): Promise<void> {
	await redis().set(revokedKey(sid), '1', 'EX', revocationTtlSeconds());
}

/**
 * The signed-in user's account state (active, session version, roles, name, e-mail) kept in Redis, so
 * that the session check of a request needs no database read (issue 18). Correctness rests on a
 * per-user *generation* counter:
 *
 * - `ct:user:gen:<uid>` is INCRemented by every change to the account (roles, deactivation and
 *   reactivation, a new password, "end all sessions") — once inside the change's transaction, which
 *   fails the change if Redis cannot be reached, and once more after the commit.
 * - `ct:user:state:<uid>` holds the row as read from the database, tagged with the generation read
 *   *before* that database read. An entry is used only while its tag equals the current generation, so
 *   an entry filled from a row older than a change is never used after that change's INCR.
 * - Entries live STATE_TTL seconds, the generation GEN_TTL seconds (longer, so an expired counter
 *   cannot make an old entry's tag current again). The TTL also bounds how long an entry can outlive
 *   a database restore or a change whose post-commit INCR was lost (Redis failing in that instant).
 *
 * Redis unreachable: the caller refuses the request (503), like the sign-out deny-list check.
 */
import type { Redis } from 'ioredis';
import { redis } from './redis';
import type { Role } from '../roles';

export const STATE_TTL = 120;
const GEN_TTL = 3600;
export const genKey = (uid: number) => `ct:user:gen:${uid}`;
export const stateKey = (uid: number) => `ct:user:state:${uid}`;

export interface CachedUser {
	id: number;
	name: string;
	email: string;
	roles: Role[];
	active: boolean;
	sv: number;
}
interface Entry extends CachedUser {
	g: string;
}

/** The entry if it is current for this generation (`gen` as read from Redis, null when missing). */
export function currentEntry(gen: string | null, raw: string | null): CachedUser | null {
	if (!raw) return null;
	try {
		const e = JSON.parse(raw) as Entry;
		return e.g === (gen ?? '0') ? e : null;
	} catch {
		return null;
	}
}

/** Store a row read from the database under the generation read before the read. */
export async function storeEntry(gen: string | null, user: CachedUser, client: Redis = redis()): Promise<void> {
	const e: Entry = { ...user, g: gen ?? '0' };
	await client.set(stateKey(user.id), JSON.stringify(e), 'EX', STATE_TTL);
}

/** A change to the account: every cached entry of it stops being used. Throws when Redis is unreachable. */
export async function invalidateUser(uid: number, client: Redis = redis()): Promise<void> {
	await client
		.multi()
		.incr(genKey(uid))
		.expire(genKey(uid), GEN_TTL)
		.del(stateKey(uid))
		.exec()
		.then((r) => {
			const failed = r?.find(([err]) => err);
			if (!r || failed) throw failed?.[0] ?? new Error('Redis transaction aborted');
		});
}

/** After the commit: the same, but a failure is only logged (the in-transaction one succeeded). */
export async function invalidateUserAfterCommit(uid: number): Promise<void> {
	await invalidateUser(uid).catch((e) =>
		console.warn(
			`[session] account ${uid}: cached state not invalidated after the change (Redis: ${e instanceof Error ? e.message : e}); it expires within ${STATE_TTL} s`
		)
	);
}

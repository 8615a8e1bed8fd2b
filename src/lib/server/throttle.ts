/**
 * Throttling of sign-in attempts with Redis counters, built so that an attacker cannot use it to
 * lock a user out, and so that parallel guesses cannot overshoot a limit.
 *
 * Three counters, each in a fixed window (SIGNIN_WINDOW_SECONDS, 15 minutes):
 * - **account + address** (`pair`, SIGNIN_MAX_PER_PAIR, 5): wrong passwords for one account from
 *   one client address. Always applies. Someone guessing from elsewhere never blocks the real user
 *   at their own address.
 * - **account** (`acct`, SIGNIN_MAX_PER_ACCOUNT, 100): a ceiling over all addresses, against a
 *   guesser spread over many addresses (100 per 15 min against passwords of 12+ characters).
 * - **address** (`addr`, SIGNIN_MAX_PER_ADDRESS, 30): failures for any account from one address
 *   (password spraying).
 * The account ceiling and the address limit do not apply to an account at an address it has
 * signed in from before (`known`, kept 30 days after each successful sign-in): colleagues behind
 * one clinic proxy keep signing in when someone there sprays, and a distributed guesser cannot
 * lock the real user out of their usual place. What "address" means: SvelteKit's
 * `getClientAddress()`; behind a reverse proxy set adapter-node's ADDRESS_HEADER (and XFF_DEPTH)
 * so that it is the client's address, not the proxy's (see README "Configuration").
 *
 * Check and count are one atomic step (a Lua script): an attempt reserves its failure before the
 * password is checked, so of N parallel guesses at most the limit ever reach bcrypt; a correct
 * password gives the reservation back. A completed password reset starts a new generation of the
 * account's counters (`gen`), which lifts any block on it.
 */
import type { Redis } from 'ioredis';
import { config } from './config';
import { redis } from './redis';

export interface ThrottleLimits {
	maxPerPair: number;
	maxPerAccount: number;
	maxPerAddress: number;
	windowSeconds: number;
	/** How long a successful sign-in makes an account+address pair known (seconds). */
	knownSeconds: number;
}

export type Verdict = { ok: true; known: boolean } | { ok: false; limit: 'pair' | 'account' | 'address' };

type Client = Pick<Redis, 'eval' | 'incr' | 'get'>;

// KEYS: pair, acct, addr, known · ARGV: maxPair, maxAcct, maxAddr, window
const RESERVE = `
local known = redis.call('EXISTS', KEYS[4]) == 1
if tonumber(redis.call('GET', KEYS[1]) or '0') >= tonumber(ARGV[1]) then return 'pair' end
if not known then
  if tonumber(redis.call('GET', KEYS[2]) or '0') >= tonumber(ARGV[2]) then return 'account' end
  if tonumber(redis.call('GET', KEYS[3]) or '0') >= tonumber(ARGV[3]) then return 'address' end
end
local function bump(k)
  redis.call('INCR', k)
  if redis.call('TTL', k) < 0 then redis.call('EXPIRE', k, ARGV[4]) end
end
bump(KEYS[1])
if known then return 'known' end
bump(KEYS[2])
bump(KEYS[3])
return 'ok'`;

// KEYS: pair, acct, addr · ARGV: known (1/0)
const RELEASE = `
local last = 3
if ARGV[1] == '1' then last = 1 end
for i = 1, last do
  if tonumber(redis.call('GET', KEYS[i]) or '0') > 0 then redis.call('DECR', KEYS[i]) end
end
return 1`;

// KEYS: pair, acct, addr, known · ARGV: known (1/0), knownSeconds
const SUCCEED = `
redis.call('DEL', KEYS[1])
if ARGV[1] == '0' then
  for i = 2, 3 do
    if tonumber(redis.call('GET', KEYS[i]) or '0') > 0 then redis.call('DECR', KEYS[i]) end
  end
end
redis.call('SET', KEYS[4], '1', 'EX', ARGV[2])
return 1`;

export function createThrottle(client: Client, limits: ThrottleLimits, prefix = 'ct:signin') {
	const norm = (email: string) => email.trim().toLowerCase();
	const gen = async (email: string) => (await client.get(`${prefix}:gen:${norm(email)}`)) ?? '0';
	const keys = async (email: string, address: string) => {
		const e = norm(email);
		const g = await gen(e);
		return [`${prefix}:pair:${g}:${e}:${address}`, `${prefix}:acct:${g}:${e}`, `${prefix}:addr:${address}`, `${prefix}:known:${e}:${address}`];
	};
	return {
		keys,
		/** Check and count one attempt (before the password is checked). */
		async reserve(email: string, address: string): Promise<Verdict> {
			const k = await keys(email, address);
			const r = (await client.eval(RESERVE, 4, ...k, limits.maxPerPair, limits.maxPerAccount, limits.maxPerAddress, limits.windowSeconds)) as string;
			if (r === 'ok' || r === 'known') return { ok: true, known: r === 'known' };
			return { ok: false, limit: r as 'pair' | 'account' | 'address' };
		},
		/** The password was right: clear the pair's failures, give back the reservation, remember the pair. */
		async succeeded(email: string, address: string, known: boolean): Promise<void> {
			await client.eval(SUCCEED, 4, ...(await keys(email, address)), known ? '1' : '0', limits.knownSeconds);
		},
		/** The password could not be checked (database down): the attempt does not count. */
		async release(email: string, address: string, known: boolean): Promise<void> {
			await client.eval(RELEASE, 3, ...(await keys(email, address)).slice(0, 3), known ? '1' : '0');
		},
		/** A completed password reset: a new generation of the account's counters, so no block remains. */
		async liftAccount(email: string): Promise<void> {
			await client.incr(`${prefix}:gen:${norm(email)}`);
		}
	};
}

export function signInThrottle() {
	return createThrottle(redis(), config.signIn);
}

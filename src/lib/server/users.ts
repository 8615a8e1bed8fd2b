/** Accounts: look-up, credentials, roles, invitations and password resets. */
import bcrypt from 'bcryptjs';
import { createHash, randomBytes } from 'node:crypto';
import { select, selectOne, exec, transaction, type Tx } from './db';
import { config } from './config';
import { parseRoles, type Role } from '../roles';
import { recordEvent } from './trail';
import { signInThrottle } from './throttle';
import { invalidateUser, invalidateUserAfterCommit } from './user-cache';

export interface UserRow {
	id: number;
	email: string;
	name: string;
	password_hash: string | null;
	roles: string;
	active: number;
	session_version: number;
	last_sign_in_at: Date | null;
	created_at: Date;
}

export interface User {
	id: number;
	email: string;
	name: string;
	roles: Role[];
	active: boolean;
	session_version: number;
	last_sign_in_at: Date | null;
	invited: boolean;
}

const toUser = (r: UserRow): User => ({
	id: r.id,
	email: r.email,
	name: r.name,
	roles: parseRoles(r.roles),
	active: !!r.active,
	session_version: r.session_version,
	last_sign_in_at: r.last_sign_in_at,
	invited: r.password_hash === null
});

/**
 * An unknown e-mail (or an invited account with no password yet) is compared against this hash,
 * of the same cost as real ones, so it costs the same bcrypt work as a known account: the answer
 * time does not tell which e-mails have accounts. Made once, on first use.
 */
let dummyHash: Promise<string> | null = null;
const dummy = () => (dummyHash ??= hashPassword(randomBytes(18).toString('base64url')));

export async function verifyCredentials(email: string, password: string): Promise<User | null> {
	const row = await selectOne<UserRow>('SELECT * FROM users WHERE email = :email', { email: email.toLowerCase() });
	const ok = await bcrypt.compare(password, row?.password_hash ?? (await dummy()));
	if (!row || !row.password_hash || !ok || !row.active) return null;
	await exec('UPDATE users SET last_sign_in_at = CURRENT_TIMESTAMP(3) WHERE id = :id', { id: row.id });
	return toUser(row);
}

export async function getUser(id: number, t?: Tx): Promise<User | null> {
	const row = await selectOne<UserRow>('SELECT * FROM users WHERE id = :id', { id }, t);
	return row ? toUser(row) : null;
}

export async function getUserByEmail(email: string): Promise<User | null> {
	const row = await selectOne<UserRow>('SELECT * FROM users WHERE email = :email', { email: email.toLowerCase() });
	return row ? toUser(row) : null;
}

export async function listUsers(): Promise<User[]> {
	return (await select<UserRow>('SELECT * FROM users ORDER BY active DESC, name')).map(toUser);
}

/** Active users holding a role (for assignment pickers and lead escalation). */
export async function usersWithRole(role: Role, t?: Tx): Promise<User[]> {
	const rows = await select<UserRow>(`SELECT * FROM users WHERE active = 1 AND FIND_IN_SET(:role, roles) > 0 ORDER BY name`, { role }, t);
	return rows.map(toUser);
}

export function hashPassword(password: string): Promise<string> {
	return bcrypt.hash(password, Math.max(12, config.bcryptCost));
}

export async function createUser(input: { email: string; name: string; roles: Role[]; password?: string }, actorId: number | null, t?: Tx): Promise<number> {
	const hash = input.password ? await hashPassword(input.password) : null;
	const { insertId } = await exec(
		'INSERT INTO users (email, name, roles, password_hash) VALUES (:email, :name, :roles, :hash)',
		{ email: input.email.toLowerCase(), name: input.name, roles: input.roles.join(','), hash },
		t
	);
	await recordEvent(
		{ actorId, entity: 'user', entityId: insertId, action: 'create', newValue: { email: input.email, name: input.name, roles: input.roles } },
		t
	);
	return insertId;
}

// Every change to an account that the session check reads (roles, active, session version) calls
// invalidateUser inside its transaction (a Redis failure fails the change) and again after the
// commit: src/lib/server/user-cache.ts explains why both.
export async function setRoles(id: number, roles: Role[], actorId: number): Promise<void> {
	await transaction(async (t) => {
		const before = await getUser(id, t);
		if (!before) throw new Error('no such user');
		await exec('UPDATE users SET roles = :roles WHERE id = :id', { id, roles: roles.join(',') }, t);
		await recordEvent({ actorId, entity: 'user', entityId: id, action: 'roles', oldValue: before.roles, newValue: roles }, t);
		await invalidateUser(id);
	});
	await invalidateUserAfterCommit(id);
}

/** Deactivate or reactivate; bumping the session version ends existing sessions at their next request. */
export async function setActive(id: number, active: boolean, actorId: number): Promise<void> {
	await transaction(async (t) => {
		await exec('UPDATE users SET active = :active, session_version = session_version + 1 WHERE id = :id', { id, active: active ? 1 : 0 }, t);
		await recordEvent({ actorId, entity: 'user', entityId: id, action: active ? 'reactivate' : 'deactivate' }, t);
		await invalidateUser(id);
	});
	await invalidateUserAfterCommit(id);
}

/** End every session of this account at its next request (sign-out when Redis cannot be reached). */
export async function endAllSessions(id: number): Promise<void> {
	await exec('UPDATE users SET session_version = session_version + 1 WHERE id = :id', { id });
	// called when Redis is not reachable: the cached state expires within STATE_TTL, and until
	// Redis answers again every request of this account is refused (503) anyway
	await invalidateUserAfterCommit(id);
}

const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

/** A one-time token for a set-password link; only its hash is stored. */
export async function issueToken(userId: number, purpose: 'invite' | 'reset', hours: number, t?: Tx): Promise<string> {
	const token = randomBytes(32).toString('base64url');
	await exec(
		'UPDATE user_tokens SET used_at = CURRENT_TIMESTAMP(3) WHERE user_id = :userId AND purpose = :purpose AND used_at IS NULL',
		{ userId, purpose },
		t
	);
	await exec(
		'INSERT INTO user_tokens (user_id, purpose, token_hash, expires_at) VALUES (:userId, :purpose, :hash, DATE_ADD(UTC_TIMESTAMP(3), INTERVAL :hours HOUR))',
		{ userId, purpose, hash: sha256(token), hours },
		t
	);
	return token;
}

export type TokenCheck = { ok: true; userId: number; purpose: 'invite' | 'reset'; email: string } | { ok: false; reason: string };

export async function checkToken(token: string, t?: Tx): Promise<TokenCheck> {
	const row = await selectOne<{ user_id: number; purpose: 'invite' | 'reset'; expired: number; used_at: Date | null; email: string; active: number }>(
		`SELECT ut.user_id, ut.purpose, ut.expires_at < UTC_TIMESTAMP(3) AS expired, ut.used_at, u.email, u.active
		   FROM user_tokens ut JOIN users u ON u.id = ut.user_id WHERE ut.token_hash = :hash`,
		{ hash: sha256(token) },
		t
	);
	if (!row) return { ok: false, reason: 'This link is not valid. Ask an administrator for a new one.' };
	if (row.used_at) return { ok: false, reason: 'This link has already been used.' };
	if (row.expired) return { ok: false, reason: 'This link has expired. Ask for a new one.' };
	if (!row.active) return { ok: false, reason: 'This account is deactivated.' };
	return { ok: true, userId: row.user_id, purpose: row.purpose, email: row.email };
}

/**
 * Use a token once: set the password, end other sessions, and lift any sign-in block on the account
 * (the sign-in page tells a blocked user to reset their password).
 */
export async function useToken(token: string, password: string): Promise<TokenCheck> {
	const hash = await hashPassword(password);
	const result = await setPasswordWithToken(token, hash);
	if (result.ok) {
		await signInThrottle()
			.liftAccount(result.email)
			.catch((e) => console.warn(`[auth] sign-in block not lifted after a password reset (Redis: ${e instanceof Error ? e.message : e})`));
	}
	return result;
}

function setPasswordWithToken(token: string, hash: string): Promise<TokenCheck> {
	return transaction(async (t): Promise<TokenCheck> => {
		const check = await checkToken(token, t);
		if (!check.ok) return check;
		const { affected } = await exec('UPDATE user_tokens SET used_at = CURRENT_TIMESTAMP(3) WHERE token_hash = :h AND used_at IS NULL', { h: sha256(token) }, t);
		if (affected !== 1) return { ok: false, reason: 'This link has already been used.' };
		await exec('UPDATE users SET password_hash = :hash, session_version = session_version + 1 WHERE id = :id', { hash, id: check.userId }, t);
		await recordEvent(
			{ actorId: check.userId, entity: 'user', entityId: check.userId, action: check.purpose === 'invite' ? 'accept_invite' : 'reset_password' },
			t
		);
		await invalidateUser(check.userId);
		return check;
	}).then(async (check: TokenCheck) => {
		if (check.ok) await invalidateUserAfterCommit(check.userId);
		return check;
	});
}

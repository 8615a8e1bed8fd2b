/** Accounts: look-up, credentials, roles, invitations and password resets. */
import bcrypt from 'bcryptjs';
import { createHash, randomBytes } from 'node:crypto';
import { literal, Op, type Transaction } from 'sequelize';
import { autocommit, readRetried, transaction, type Tx } from './db';
import { dbNow, reading } from './models/protocol';
import { models } from './models';
import type { User as UserModel } from './models/people';
import { config } from './config';
import { parseRoles, type Role } from '../roles';
import { recordEvent } from './trail';
import { signInThrottle } from './throttle';
import { invalidateUser, invalidateUserAfterCommit } from './user-cache';

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

/** The one mapper of a `users` row (never the password hash: only whether one is set). */
const toUser = (r: UserModel): User => ({
	id: r.id,
	email: r.email,
	name: r.name,
	roles: parseRoles(r.roles),
	active: !!r.active,
	session_version: r.session_version,
	last_sign_in_at: r.last_sign_in_at ?? null,
	invited: r.password_hash === null
});

/**
 * An unknown e-mail (or an invited account with no password yet) is compared against this hash,
 * of the same cost as real ones, so it costs the same bcrypt work as a known account: the answer
 * time does not tell which e-mails have accounts. Made once, on first use.
 */
let dummyHash: Promise<string> | null = null;
const dummy = () => (dummyHash ??= hashPassword(randomBytes(18).toString('base64url')));

const tx_ = (t?: Tx) => t ?? undefined;

export async function verifyCredentials(email: string, password: string): Promise<User | null> {
	const row = await readRetried(() => models().User.findOne({ where: { email: email.toLowerCase() } }));
	const ok = await bcrypt.compare(password, row?.password_hash ?? (await dummy()));
	if (!row || !row.password_hash || !ok || !row.active) return null;
	await autocommit(() => row.update({ last_sign_in_at: dbNow() }));
	return toUser(row);
}

export async function getUser(id: number, t?: Tx): Promise<User | null> {
	const row = await reading(t, () => models().User.findByPk(id, { transaction: tx_(t) }));
	return row ? toUser(row) : null;
}

export async function getUserByEmail(email: string): Promise<User | null> {
	const row = await readRetried(() => models().User.findOne({ where: { email: email.toLowerCase() } }));
	return row ? toUser(row) : null;
}

export async function listUsers(): Promise<User[]> {
	const rows = await readRetried(() =>
		models().User.findAll({
			order: [
				['active', 'DESC'],
				['name', 'ASC']
			]
		})
	);
	return rows.map(toUser);
}

/** Active users holding a role (for assignment pickers and lead escalation). */
export async function usersWithRole(role: Role, t?: Tx): Promise<User[]> {
	const rows = await reading(t, () =>
		models().User.findAll({
			// roles is a comma-separated list: FIND_IN_SET matches one role exactly
			where: { active: true, [Op.and]: [literal(`FIND_IN_SET(${models().User.sequelize!.escape(role)}, roles) > 0`)] },
			order: [['name', 'ASC']],
			transaction: tx_(t)
		})
	);
	return rows.map(toUser);
}

export function hashPassword(password: string): Promise<string> {
	return bcrypt.hash(password, Math.max(12, config.bcryptCost));
}

/** The account and its trail event together: in the caller's transaction, or in one of its own. */
export async function createUser(input: { email: string; name: string; roles: Role[]; password?: string }, actorId: number | null, t?: Tx): Promise<number> {
	const hash = input.password ? await hashPassword(input.password) : null;
	const run = async (tr: Transaction) => {
		const { id: insertId } = await models().User.create(
			{ email: input.email.toLowerCase(), name: input.name, roles: input.roles.join(','), password_hash: hash },
			{ transaction: tr }
		);
		await recordEvent(
			{ actorId, entity: 'user', entityId: insertId, action: 'create', newValue: { email: input.email, name: input.name, roles: input.roles } },
			tr
		);
		return insertId;
	};
	return t ? run(t) : transaction(run);
}

// Every change to an account that the session check reads (roles, active, session version) calls
// invalidateUser inside its transaction (a Redis failure fails the change) and again after the
// commit: src/lib/server/user-cache.ts explains why both.
export async function setRoles(id: number, roles: Role[], actorId: number): Promise<void> {
	await transaction(async (t) => {
		const before = await getUser(id, t);
		if (!before) throw new Error('no such user');
		await models().User.update({ roles: roles.join(',') }, { where: { id }, transaction: t });
		await recordEvent({ actorId, entity: 'user', entityId: id, action: 'roles', oldValue: before.roles, newValue: roles }, t);
		await invalidateUser(id);
	});
	await invalidateUserAfterCommit(id);
}

/** Deactivate or reactivate; bumping the session version ends existing sessions at their next request. */
export async function setActive(id: number, active: boolean, actorId: number): Promise<void> {
	await transaction(async (t) => {
		await models().User.update({ active, session_version: literal('session_version + 1') }, { where: { id }, transaction: t });
		await recordEvent({ actorId, entity: 'user', entityId: id, action: active ? 'reactivate' : 'deactivate' }, t);
		await invalidateUser(id);
	});
	await invalidateUserAfterCommit(id);
}

/** End every session of this account at its next request (sign-out when Redis cannot be reached). */
export async function endAllSessions(id: number): Promise<void> {
	await autocommit(() => models().User.increment('session_version', { where: { id } }));
	// called when Redis is not reachable: the cached state expires within STATE_TTL, and until
	// Redis answers again every request of this account is refused (503) anyway
	await invalidateUserAfterCommit(id);
}

const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

/** A one-time token for a set-password link; only its hash is stored. */
export async function issueToken(userId: number, purpose: 'invite' | 'reset', hours: number, t?: Tx): Promise<string> {
	const token = randomBytes(32).toString('base64url');
	const { UserToken } = models();
	// the older tokens are spent and the new one stored together (a new link voids the old ones); times
	// are the database's clock, so every app server agrees on when a link expires
	const run = async (tr: Transaction) => {
		await UserToken.update({ used_at: dbNow() }, { where: { user_id: userId, purpose, used_at: null }, transaction: tr });
		await UserToken.create(
			{
				user_id: userId,
				purpose,
				token_hash: sha256(token),
				expires_at: literal(`CURRENT_TIMESTAMP(3) + INTERVAL ${Math.round(hours * 60)} MINUTE`) as unknown as Date
			},
			{ transaction: tr }
		);
	};
	await (t ? run(t) : transaction(run));
	return token;
}

export type TokenCheck = { ok: true; userId: number; purpose: 'invite' | 'reset'; email: string } | { ok: false; reason: string };

export async function checkToken(token: string, t?: Tx): Promise<TokenCheck> {
	const read = () =>
		models().UserToken.findOne({
			where: { token_hash: sha256(token) },
			// expired by the database's clock (the one that stamped expires_at), not this server's
			attributes: { include: [[literal('expires_at < CURRENT_TIMESTAMP(3)'), 'expired']] },
			include: [{ association: 'user', attributes: ['email', 'active'], required: true }],
			transaction: tx_(t)
		});
	const row = await reading(t, read);
	if (!row) return { ok: false, reason: 'This link is not valid. Ask an administrator for a new one.' };
	if (row.used_at) return { ok: false, reason: 'This link has already been used.' };
	if (Number(row.get('expired' as never))) return { ok: false, reason: 'This link has expired. Ask for a new one.' };
	if (!row.user!.active) return { ok: false, reason: 'This account is deactivated.' };
	return { ok: true, userId: row.user_id, purpose: row.purpose, email: row.user!.email };
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
		const { User, UserToken } = models();
		// the token is used once: only the request whose update finds it unused goes on
		const [affected] = await UserToken.update({ used_at: dbNow() }, { where: { token_hash: sha256(token), used_at: null }, transaction: t });
		if (affected !== 1) return { ok: false, reason: 'This link has already been used.' };
		await User.update({ password_hash: hash, session_version: literal('session_version + 1') }, { where: { id: check.userId }, transaction: t });
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

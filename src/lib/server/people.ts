/** The People service: invitations, role changes and deactivation, with their e-mails. */
import { transaction, isUniqueViolation } from './db';
import { ServiceError } from './errors';
import { createUser, getUserByEmail, setActive, setRoles, getUser } from './users';
import { enqueueMail } from './mail/outbox';
import type { Role } from '../roles';
import { randomUUID } from 'node:crypto';

export async function invite(input: { email: string; name: string; roles: Role[] }, actor: { id: number; name: string }): Promise<number> {
	const taken = () => new ServiceError(400, 'An account with this e-mail already exists.', 'email');
	if (await getUserByEmail(input.email)) throw taken();
	try {
		return await transaction(async (t) => {
			const id = await createUser(input, actor.id, t);
			await enqueueMail('invite', `invite:${id}:${randomUUID()}`, { userId: id, invitedBy: actor.name }, t);
			return id;
		});
	} catch (e) {
		// Two invitations of one address at the same moment: the unique key refuses the second.
		if (isUniqueViolation(e)) throw taken();
		throw e;
	}
}

/** The account an action names, or a refusal naming the id (a stale page, or a tampered form). */
async function existing(id: number) {
	const user = await getUser(id);
	if (!user) throw new ServiceError(400, `No account has id ${id}. Reload the page; it may be out of date.`, 'form');
	return user;
}

export async function resendInvite(id: number, actor: { id: number; name: string }): Promise<void> {
	const user = await existing(id);
	if (!user.invited) throw new ServiceError(400, 'That person has already set a password.', 'form');
	await enqueueMail('invite', `invite:${id}:${randomUUID()}`, { userId: id, invitedBy: actor.name });
}

export async function changeRoles(id: number, roles: Role[], actor: { id: number }): Promise<void> {
	if (id === actor.id && !roles.includes('admin')) throw new ServiceError(400, 'You cannot remove your own administrator role.', 'roles');
	await existing(id);
	await setRoles(id, roles, actor.id);
}

export async function changeActive(id: number, active: boolean, actor: { id: number }): Promise<void> {
	if (id === actor.id && !active) throw new ServiceError(400, 'You cannot deactivate your own account. Another administrator can.', 'form');
	await existing(id);
	await setActive(id, active, actor.id);
}

/** Password reset: always answers the same way, whether or not the address has an account. */
export async function requestReset(email: string): Promise<void> {
	const user = await getUserByEmail(email);
	if (!user || !user.active || user.invited) return;
	await enqueueMail('reset', `reset:${user.id}:${randomUUID()}`, { userId: user.id });
}

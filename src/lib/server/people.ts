/** The People service: invitations, role changes and deactivation, with their e-mails. */
import { transaction } from './db';
import { createUser, getUserByEmail, setActive, setRoles, getUser } from './users';
import { enqueueMail } from './mail/outbox';
import type { Role } from '../roles';
import { randomUUID } from 'node:crypto';

export class PeopleError extends Error {
	constructor(
		public field: string,
		message: string
	) {
		super(message);
	}
}

export async function invite(input: { email: string; name: string; roles: Role[] }, actor: { id: number; name: string }): Promise<number> {
	if (await getUserByEmail(input.email)) throw new PeopleError('email', 'An account with this e-mail already exists.');
	return transaction(async (t) => {
		const id = await createUser(input, actor.id, t);
		await enqueueMail('invite', `invite:${id}:${randomUUID()}`, { userId: id, invitedBy: actor.name }, t);
		return id;
	});
}

export async function resendInvite(id: number, actor: { id: number; name: string }): Promise<void> {
	const user = await getUser(id);
	if (!user || !user.invited) throw new PeopleError('form', 'That person has already set a password.');
	await enqueueMail('invite', `invite:${id}:${randomUUID()}`, { userId: id, invitedBy: actor.name });
}

export async function changeRoles(id: number, roles: Role[], actor: { id: number }): Promise<void> {
	if (id === actor.id && !roles.includes('admin')) throw new PeopleError('roles', 'You cannot remove your own administrator role.');
	await setRoles(id, roles, actor.id);
}

export async function changeActive(id: number, active: boolean, actor: { id: number }): Promise<void> {
	if (id === actor.id && !active) throw new PeopleError('form', 'You cannot deactivate your own account.');
	await setActive(id, active, actor.id);
}

/** Password reset: always answers the same way, whether or not the address has an account. */
export async function requestReset(email: string): Promise<void> {
	const user = await getUserByEmail(email);
	if (!user || !user.active || user.invited) return;
	await enqueueMail('reset', `reset:${user.id}:${randomUUID()}`, { userId: user.id });
}

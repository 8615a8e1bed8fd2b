/** The signed-in user of a request, checked against the database on every request. */
import type { Session } from '@auth/sveltekit';
import { getUser } from './users';

/** The session could not be checked against the sign-out deny-list (Redis unreachable). */
export class SessionUnchecked extends Error {
	constructor() {
		super('The session could not be checked (Redis unreachable).');
	}
}

export async function sessionUser(session: Session | null): Promise<App.Locals['user']> {
	const uid = session?.user?.uid;
	if (!uid) return null;
	if (session.user.checked === false) throw new SessionUnchecked();
	const user = await getUser(uid);
	// A deactivated account, or one whose sessions were ended (password set, deactivated), is anonymous.
	if (!user || !user.active || user.session_version !== session.user.sv) return null;
	return { id: user.id, name: user.name, email: user.email, roles: user.roles };
}

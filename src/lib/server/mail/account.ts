/**
 * The account e-mails' renderers (invitation, password reset): each makes a fresh one-time
 * set-password token when the message is rendered, so a link in the outbox never waits there
 * already counting down. Registered into ./deliver.ts by the worker (scripts/worker.ts), which
 * imports this module once it can compile Svelte (./templates.ts renders components).
 */
import { config } from '../config';
import { getUser, issueToken } from '../users';
import { renderers } from './deliver';
import { invitationMail, resetMail } from './templates';

const TOKEN_HOURS = { invite: 72, reset: 2 };

renderers.invite = async (p) => {
	const user = await getUser(Number(p.userId));
	if (!user || !user.active) return null;
	const token = await issueToken(user.id, 'invite', TOKEN_HOURS.invite);
	return invitationMail({
		email: user.email,
		name: user.name,
		link: `${config.origin}/set-password/${token}`,
		hours: TOKEN_HOURS.invite,
		invitedBy: String(p.invitedBy ?? 'An administrator')
	});
};

renderers.reset = async (p) => {
	const user = await getUser(Number(p.userId));
	if (!user || !user.active) return null;
	const token = await issueToken(user.id, 'reset', TOKEN_HOURS.reset);
	return resetMail({ email: user.email, name: user.name, link: `${config.origin}/set-password/${token}`, hours: TOKEN_HOURS.reset });
};

export {};

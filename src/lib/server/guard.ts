/**
 * Guard helpers for load functions, actions and endpoints. The route-level rule has already been
 * checked in hooks; these give typed access to the user and raise the right error for object-level
 * refusals (an id the user may not see answers 404, so ids cannot be probed).
 */
import { error, type RequestEvent } from '@sveltejs/kit';
import type { Role } from '../roles';

export function requireUser(event: Pick<RequestEvent, 'locals'>): NonNullable<App.Locals['user']> {
	const user = event.locals.user;
	if (!user) error(401, { message: 'Sign in first.', code: 'unauthenticated' });
	return user;
}

export function requireRole(event: Pick<RequestEvent, 'locals'>, ...roles: Role[]): NonNullable<App.Locals['user']> {
	const user = requireUser(event);
	if (!roles.some((r) => user.roles.includes(r))) error(403, { message: 'Your role does not include this action.', code: 'forbidden' });
	return user;
}

export function notFound(what = 'This item'): never {
	error(404, { message: `${what} does not exist or is not assigned to you.`, code: 'not_found' });
}

/** Parse a positive integer route parameter, or answer 404. */
export function idParam(value: string | undefined, what = 'This item'): number {
	const n = Number(value);
	if (!Number.isInteger(n) || n <= 0 || n > 2 ** 31) notFound(what);
	return n;
}

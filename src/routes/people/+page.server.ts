import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { requireRole } from '$lib/server/guard';
import { listUsers } from '$lib/server/users';
import { invite, resendInvite, changeRoles, changeActive } from '$lib/server/people';
import { ServiceError } from '$lib/server/errors';
import { inviteSchema, rolesSchema, activeSchema } from '$lib/validation/people';
import { fieldMessages } from '$lib/validation/issues';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'admin');
	const users = await listUsers();
	return {
		people: users.map((u) => ({
			id: u.id,
			email: u.email,
			name: u.name,
			roles: u.roles,
			active: u.active,
			invited: u.invited,
			lastSignIn: u.last_sign_in_at ? new Date(u.last_sign_in_at).toISOString() : null
		}))
	};
};

function form(data: FormData): Record<string, unknown> & { roles: string[] } {
	return { ...Object.fromEntries(data), roles: data.getAll('roles').map(String) };
}

async function run(action: string, fn: () => Promise<unknown>, values: Record<string, unknown>) {
	try {
		await fn();
		return { action, ok: true as const };
	} catch (e) {
		if (e instanceof ServiceError) return fail(e.status, { action, values, errors: e.fields });
		throw e;
	}
}

export const actions: Actions = {
	invite: async (event) => {
		const actor = requireRole(event, 'admin');
		const values = form(await event.request.formData());
		const parsed = inviteSchema.safeParse(values);
		if (!parsed.success) return fail(400, { action: 'invite', values, errors: fieldMessages(parsed.error) });
		return run('invite', () => invite(parsed.data, actor), values);
	},
	resend: async (event) => {
		const actor = requireRole(event, 'admin');
		const values = form(await event.request.formData());
		const id = Number(values.id);
		if (!Number.isInteger(id) || id <= 0) return fail(400, { action: 'resend', values, errors: { form: 'Unknown account' } });
		return run('resend', () => resendInvite(id, actor), values);
	},
	roles: async (event) => {
		const actor = requireRole(event, 'admin');
		const values = form(await event.request.formData());
		const parsed = rolesSchema.safeParse(values);
		if (!parsed.success) return fail(400, { action: 'roles', values, errors: fieldMessages(parsed.error) });
		return run('roles', () => changeRoles(parsed.data.id, parsed.data.roles, actor), values);
	},
	active: async (event) => {
		const actor = requireRole(event, 'admin');
		const values = form(await event.request.formData());
		const parsed = activeSchema.safeParse(values);
		if (!parsed.success) return fail(400, { action: 'active', values, errors: fieldMessages(parsed.error) });
		return run('active', () => changeActive(parsed.data.id, parsed.data.active === '1', actor), values);
	}
};

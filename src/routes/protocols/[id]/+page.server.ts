import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { z } from 'zod';
import { requireUser, requireRole, idParam } from '$lib/server/guard';
import { reassign } from '$lib/server/protocols/service';
import { protocolPage } from '$lib/server/protocols/page';
import { addAttachment } from '$lib/server/protocols/attachments';
import { reopen } from '$lib/server/protocols/decisions';
import { requireSecondPass } from '$lib/server/verification';
import { pageError, actionError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	const id = idParam(event.params.id, 'This protocol');
	try {
		// Entry sends the scorer here after a submit (`?submitted=first|second`): the page confirms it
		const submitted = (['first', 'second'] as const).find((w) => w === event.url.searchParams.get('submitted')) ?? null;
		return { ...(await protocolPage(id, user)), created: event.url.searchParams.has('created'), submitted, me: user.id };
	} catch (e) {
		pageError(e);
	}
};

const reassignSchema = z.object({
	duty: z.enum(['first', 'second', 'reviewer']),
	userId: z.coerce.number().int().positive('Choose a person'),
	reason: z.string().trim().min(5, 'Give a reason for the change').max(500)
});

export const actions: Actions = {
	upload: async (event) => {
		const user = requireUser(event);
		const data = await event.request.formData();
		try {
			const a = await addAttachment(idParam(event.params.id), user, data.get('file') as File | null);
			return { action: 'upload', ok: true, filename: a.filename };
		} catch (e) {
			return actionError(e, 'upload');
		}
	},
	reassign: async (event) => {
		const user = requireRole(event, 'lead');
		const parsed = reassignSchema.safeParse(Object.fromEntries(await event.request.formData()));
		if (!parsed.success) return fail(400, { action: 'reassign', message: parsed.error.issues[0].message, field: String(parsed.error.issues[0].path[0]) });
		try {
			await reassign(idParam(event.params.id), parsed.data.duty, parsed.data.userId, parsed.data.reason, user);
			return { action: 'reassign', ok: true };
		} catch (e) {
			return actionError(e, 'reassign');
		}
	},
	requireSecond: async (event) => {
		const user = requireRole(event, 'lead');
		const reason = (await event.request.formData()).get('reason');
		try {
			await requireSecondPass(idParam(event.params.id), user, reason);
			return { action: 'requireSecond', ok: true };
		} catch (e) {
			return actionError(e, 'requireSecond');
		}
	},
	reopen: async (event) => {
		const user = requireRole(event, 'lead');
		const reason = String((await event.request.formData()).get('reason') ?? '');
		try {
			await reopen(idParam(event.params.id), user, reason);
			return { action: 'reopen', ok: true };
		} catch (e) {
			return actionError(e, 'reopen');
		}
	}
};

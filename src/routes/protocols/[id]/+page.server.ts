import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { z } from 'zod';
import { requireUser, requireRole, idParam } from '$lib/server/guard';
import { protocolView, protocolHistoryFor, reassign, planGroups } from '$lib/server/protocols/service';
import { addAttachment } from '$lib/server/protocols/attachments';
import { reopen } from '$lib/server/protocols/review';
import { protocolAmendments } from '$lib/server/protocols/amendments';
import { requireSecondPass } from '$lib/server/verification';
import { usersWithRole } from '$lib/server/users';
import { listProtocolMail, notifyReviewerChanged } from '$lib/server/mail/review';
import { selectOne } from '$lib/server/db';
import { pageError, actionError } from '$lib/server/http';

export const load: PageServerLoad = async (event) => {
	const user = requireUser(event);
	const id = idParam(event.params.id, 'This protocol');
	try {
		const view = await protocolView(id, user);
		const history = await protocolHistoryFor(id, user);
		const isLead = view.duties.includes('lead');
		const mail = view.protocol.status === 'in_review' || view.protocol.status === 'verified' ? await listProtocolMail(id) : [];
		let warnings: string[] = [];
		if (isLead || view.duties.includes('reviewer')) {
			const ex = await selectOne<{ birth_date: string; sex: string | null; education_years: number | null }>(
				'SELECT birth_date, sex, education_years FROM examinees WHERE id = :id',
				{ id: view.protocol.examinee_id }
			);
			const plan = await planGroups(
				view.protocol.battery_id,
				view.protocol.norm_set_id,
				{ birthDate: ex!.birth_date, sex: ex!.sex, educationYears: ex!.education_years },
				view.protocol.test_date
			).catch(() => null);
			warnings = [...new Set((plan?.plan ?? []).flatMap((x) => x.warnings.map((w) => w.message)))];
		}
		const people = isLead
			? {
					scorers: (await usersWithRole('scorer')).map((u) => ({ id: u.id, name: u.name })),
					reviewers: (await usersWithRole('reviewer')).map((u) => ({ id: u.id, name: u.name }))
				}
			: null;
		const amendments = isLead || view.duties.includes('reviewer') ? await protocolAmendments(id) : [];
		return {
			amendments,
			view: { ...view, protocol: { ...view.protocol, status_changed_at: view.protocol.status_changed_at, created_at: view.protocol.created_at } },
			history,
			mail,
			warnings,
			people,
			created: event.url.searchParams.has('created'),
			me: user.id
		};
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
			await reassign(idParam(event.params.id), parsed.data.duty, parsed.data.userId, parsed.data.reason, user, (p, t) =>
				notifyReviewerChanged(p.id, p.round, p.reviewer_id, t)
			);
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

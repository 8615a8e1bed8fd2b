import type { Actions, PageServerLoad } from './$types';
import { fail } from '@sveltejs/kit';
import { superValidate, message } from 'sveltekit-superforms';
import { zod4 } from 'sveltekit-superforms/adapters';
import { requireRole } from '$lib/server/guard';
import { serviceSettings, updateServiceSettings } from '$lib/server/settings';
import { serviceSettingsSchema } from '$lib/validation/settings';

export const load: PageServerLoad = async (event) => {
	requireRole(event, 'admin');
	const s = await serviceSettings();
	return {
		form: await superValidate(
			{ reminder_interval_minutes: s.reminderIntervalMinutes, escalate_after_reminders: s.escalateAfterReminders, detail: s.detail },
			zod4(serviceSettingsSchema)
		)
	};
};

export const actions: Actions = {
	default: async (event) => {
		const user = requireRole(event, 'admin');
		const form = await superValidate(event.request, zod4(serviceSettingsSchema));
		if (!form.valid) return fail(400, { form });
		const { changed } = await updateServiceSettings(
			{ reminderIntervalMinutes: form.data.reminder_interval_minutes, escalateAfterReminders: form.data.escalate_after_reminders, detail: form.data.detail },
			user.id
		);
		return message(form, changed ? 'Saved. The next review e-mail follows these settings.' : 'Nothing changed.');
	}
};

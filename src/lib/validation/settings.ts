import { z } from 'zod';

/** Longest reminder interval: 90 days in minutes (the service refuses more). */
export const MAX_INTERVAL_MINUTES = 60 * 24 * 90;

/**
 * The admin's service settings for review e-mail: how often a reviewer is reminded, after how
 * many reminders the leads are copied in, and how much of the discrepancy list an e-mail carries.
 */
export const serviceSettingsSchema = z.object({
	reminder_interval_minutes: z
		.number({ message: 'Reminder interval: enter a number of minutes' })
		.finite('Reminder interval: enter a number of minutes')
		.gt(0, 'Reminder interval: must be above 0 minutes')
		.max(MAX_INTERVAL_MINUTES, `Reminder interval: at most ${MAX_INTERVAL_MINUTES} minutes (90 days)`),
	escalate_after_reminders: z
		.number({ message: 'Escalation: enter a whole number of reminders' })
		.min(0, 'Escalation: 0 or more reminders')
		.max(1000, 'Escalation: at most 1000 reminders')
		// a refinement, not .int(): superforms reads an integer field with parseInt, which would take
		// "2.5" as 2; read as a number, 2.5 is refused with this message
		.refine(Number.isInteger, 'Escalation: enter a whole number of reminders'),
	detail: z.enum(['full', 'counts'], { message: 'E-mail detail: choose "full" or "counts"' })
});

export type ServiceSettingsInput = z.infer<typeof serviceSettingsSchema>;

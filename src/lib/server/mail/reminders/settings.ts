/** The review e-mail settings: per site, in the `settings` table; defaults from the environment. */
import { jsonValue, type Tx } from '../../db';
import { config } from '../../config';
import { models } from '../../models';
import { reading } from '../../models/protocol';

export interface ReviewMailSettings {
	/** Minutes between reminders (default 1440 = 24 h; demo and tests use minutes or seconds). */
	reminderIntervalMinutes: number;
	/** Reminders after which leads are copied in: reminder N+1 and later carry the leads in cc. */
	escalateAfterReminders: number;
	/**
	 * What a review e-mail says about the discrepancies: `full` lists each one with both values and the
	 * recomputed value; `counts` gives only how many (by kind) and the link, for sites that keep
	 * scores out of e-mail.
	 */
	detail: MailDetail;
}

export type MailDetail = 'full' | 'counts';
const validDetail = (d: unknown): d is MailDetail => d === 'full' || d === 'counts';

export const REVIEW_MAIL_SETTING = 'review_mail';

export async function reviewMailSettings(t?: Tx): Promise<ReviewMailSettings> {
	const defaults: ReviewMailSettings = {
		reminderIntervalMinutes: config.reminderIntervalMinutes,
		escalateAfterReminders: config.escalateAfterReminders,
		detail: validDetail(config.mailDetail) ? config.mailDetail : 'full'
	};
	const row = await reading(t, () => models().Setting.findByPk(REVIEW_MAIL_SETTING, { transaction: t ?? undefined }));
	if (!row) return defaults;
	try {
		const v = jsonValue<Partial<ReviewMailSettings>>(row.value);
		return {
			reminderIntervalMinutes: validInterval(v.reminderIntervalMinutes) ? v.reminderIntervalMinutes : defaults.reminderIntervalMinutes,
			escalateAfterReminders: validCount(v.escalateAfterReminders) ? v.escalateAfterReminders : defaults.escalateAfterReminders,
			detail: validDetail(v.detail) ? v.detail : defaults.detail
		};
	} catch {
		return defaults;
	}
}

const validInterval = (n: unknown): n is number => typeof n === 'number' && Number.isFinite(n) && n > 0 && n <= 60 * 24 * 90;
const validCount = (n: unknown): n is number => typeof n === 'number' && Number.isInteger(n) && n >= 0 && n <= 1000;

/** Save the site's reminder settings (admin service settings). Throws on values out of range. */
export async function saveReviewMailSettings(input: Omit<ReviewMailSettings, 'detail'> & { detail?: MailDetail }, t?: Tx): Promise<void> {
	const s: ReviewMailSettings = { ...input, detail: input.detail ?? 'full' };
	if (!validInterval(s.reminderIntervalMinutes)) throw new Error('reminderIntervalMinutes must be above 0 and at most 90 days');
	if (!validCount(s.escalateAfterReminders)) throw new Error('escalateAfterReminders must be a whole number from 0 to 1000');
	if (!validDetail(s.detail)) throw new Error('detail must be "full" or "counts"');
	await models().Setting.upsert({ name: REVIEW_MAIL_SETTING, value: s }, { transaction: t ?? undefined });
}

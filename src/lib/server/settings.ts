/**
 * Service settings an admin edits on /settings (product.md: the admin manages service settings).
 * Today: the review e-mail settings (reminder interval, escalation, detail). A change is written
 * with its audit event (before and after) in one transaction.
 */
import { transaction } from './db';
import { recordEvent } from './trail';
import { reviewMailSettings, saveReviewMailSettings, REVIEW_MAIL_SETTING, type ReviewMailSettings } from './mail/reminders/settings';

export async function serviceSettings(): Promise<ReviewMailSettings> {
	return reviewMailSettings();
}

/** Save the review e-mail settings; returns whether anything changed (no audit event when not). */
export async function updateServiceSettings(next: ReviewMailSettings, actorId: number): Promise<{ changed: boolean }> {
	return transaction(async (t) => {
		const before = await reviewMailSettings(t);
		const changed =
			before.reminderIntervalMinutes !== next.reminderIntervalMinutes ||
			before.escalateAfterReminders !== next.escalateAfterReminders ||
			before.detail !== next.detail;
		if (!changed) return { changed: false };
		await saveReviewMailSettings(next, t);
		await recordEvent({ actorId, entity: 'settings', entityId: REVIEW_MAIL_SETTING, action: 'update', oldValue: before, newValue: next }, t);
		return { changed: true };
	});
}

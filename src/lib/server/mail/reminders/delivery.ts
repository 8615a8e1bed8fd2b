/**
 * The worker's side of review mail: renders a message from the database (./scheduling.ts loadState)
 * with ./render.ts, and schedules the next reminder after a delivery. Importing this module registers
 * both for the review kinds in ../deliver.ts. Only the worker (scripts/worker.ts) imports it, after
 * registering the .svelte hook; the services write review mail through ./scheduling.ts.
 */
import { config } from '../../config';
import { usersWithRole } from '../../users';
import { afterDelivery, afterDeliveryMany, batchRenderers, renderers, type RenderedMail } from '../deliver';
import { reviewMailSettings, type ReviewMailSettings } from './settings';
import { loadState, loadStates, scheduleNext, scheduleNextMany, type RenderedReviewState, type ReviewState } from './scheduling';
import { reviewMailBody } from './render';
import type { ReviewMailPayload } from './keys';

export async function renderReview(raw: Record<string, unknown>, now = new Date()): Promise<RenderedMail | null> {
	const p = raw as unknown as ReviewMailPayload;
	const state = await loadState(p, p.reminderNo > 0);
	if (!state) return null;
	const settings = await reviewMailSettings();
	const escalated = p.reminderNo > settings.escalateAfterReminders;
	return reviewMail(p, state, settings, escalated ? await leadEmails() : [], now);
}

/** The messages of a batch: what they need read once for all (../deliver.ts deliverBatch). */
export async function renderReviews(raw: Record<string, unknown>[], now = new Date()): Promise<(RenderedMail | null | Error)[]> {
	const ps = raw as unknown as ReviewMailPayload[];
	const states = await loadStates(ps);
	if (states.every((s) => !s)) return states.map(() => null);
	const settings = await reviewMailSettings();
	const leads = ps.some((p, i) => states[i] && p.reminderNo > settings.escalateAfterReminders) ? await leadEmails() : [];
	return ps.map((p, i) => {
		const state = states[i];
		if (!state) return null;
		try {
			return reviewMail(p, state, settings, p.reminderNo > settings.escalateAfterReminders ? leads : [], now);
		} catch (e) {
			return e instanceof Error ? e : new Error(String(e));
		}
	});
}

const leadEmails = async () => [...new Set((await usersWithRole('lead')).map((u) => u.email.toLowerCase()))];

function reviewMail(p: ReviewMailPayload, state: ReviewState, settings: ReviewMailSettings, leads: string[], now: Date): RenderedMail {
	const escalated = p.reminderNo > settings.escalateAfterReminders;
	const reviewerEmail = state.reviewer.email.toLowerCase();
	const cc = leads.filter((e) => e !== reviewerEmail);
	const testDate = state.protocol.test_date instanceof Date ? state.protocol.test_date.toISOString().slice(0, 10) : String(state.protocol.test_date);
	const body = reviewMailBody(
		{
			reminderNo: p.reminderNo,
			code: state.protocol.code,
			link: `${config.origin}/protocols/${p.protocolId}/review`,
			reviewerName: state.reviewer.name,
			battery: state.protocol.battery,
			testDate,
			discrepancies: state.open,
			escalated,
			intervalMinutes: settings.reminderIntervalMinutes,
			detail: settings.detail,
			round: p.round,
			why: p.reminderNo === 0 ? p.why : undefined,
			since: state.protocol.status_changed_at,
			timeZone: config.timeZone
		},
		now
	);
	const context: RenderedReviewState = { state, settings };
	return { to: [state.reviewer.email], cc, ...body, protocolId: p.protocolId, reminderNo: p.reminderNo, context };
}

renderers.review_first = (p) => renderReview(p);
renderers.review_reminder = (p) => renderReview(p);
afterDelivery.review_first = (job, result, context) => scheduleNext(job, result, Date.now(), context as RenderedReviewState | undefined);
afterDelivery.review_reminder = (job, result, context) => scheduleNext(job, result, Date.now(), context as RenderedReviewState | undefined);
batchRenderers.review_first = (ps) => renderReviews(ps);
batchRenderers.review_reminder = (ps) => renderReviews(ps);
afterDeliveryMany.review_first = (sent) => scheduleNextMany(sent);
afterDeliveryMany.review_reminder = (sent) => scheduleNextMany(sent);

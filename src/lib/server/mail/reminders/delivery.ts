/**
 * The worker's side of review mail: renders a message from the database (./scheduling.ts loadState)
 * with ./render.ts, and schedules the next reminder after a delivery. Importing this module registers
 * both for the review kinds in ../deliver.ts. Only the worker (scripts/worker.ts) imports it, after
 * registering the .svelte hook; the services write review mail through ./scheduling.ts.
 */
import { config } from '../../config';
import { usersWithRole } from '../../users';
import { afterDelivery, renderers, type RenderedMail } from '../deliver';
import { reviewMailSettings } from './settings';
import { loadState, scheduleNext, type RenderedReviewState } from './scheduling';
import { reviewMailBody } from './render';
import type { ReviewMailPayload } from './keys';

export async function renderReview(raw: Record<string, unknown>, now = new Date()): Promise<RenderedMail | null> {
	const p = raw as unknown as ReviewMailPayload;
	const state = await loadState(p, p.reminderNo > 0);
	if (!state) return null;
	const settings = await reviewMailSettings();
	const escalated = p.reminderNo > settings.escalateAfterReminders;
	const reviewerEmail = state.reviewer.email.toLowerCase();
	const cc = escalated ? [...new Set((await usersWithRole('lead')).map((u) => u.email.toLowerCase()))].filter((e) => e !== reviewerEmail) : [];
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

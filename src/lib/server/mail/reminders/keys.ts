/**
 * The keys of review e-mail chains (pure; no database).
 *
 * `review:<protocol>:r<round>:u<reviewer>:<n>` (n = 0 first e-mail, 1.. reminders). A reviewer
 * assigned again in the same round (A → B → A) gets a new chain `…:u<reviewer>.<generation>:<n>`;
 * the current chain of a protocol round is the one whose first e-mail was written last.
 */

export interface ReviewMailPayload {
	protocolId: number;
	round: number;
	reviewerId: number;
	/** The chain: `review:<p>:r<round>:u<reviewer>` plus `.<generation>` from the second assignment on. */
	chain: string;
	/** 0 for the first e-mail, 1.. for reminders. */
	reminderNo: number;
	notBefore?: number;
	/** Why this round exists, for a round after the first: a reopen or an amendment, with its reason. */
	why?: { action: 'reopen' | 'amendment'; reason: string; field?: string };
}

export const roundPrefix = (protocolId: number, round: number) => `review:${protocolId}:r${round}:`;

export const chainOf = (protocolId: number, round: number, reviewerId: number, generation = 1) =>
	`${roundPrefix(protocolId, round)}u${reviewerId}${generation > 1 ? `.${generation}` : ''}`;

export const reviewMailKey = (chain: string, reminderNo: number) => `${chain}:${reminderNo}`;

/** The chain a key belongs to (the key without its `:<n>`). */
export const chainOfKey = (key: string) => key.replace(/:\d+$/, '');

/** Parse a review key back into its parts (null for other keys). */
export function parseReviewKey(key: string): { protocolId: number; round: number; reviewerId: number; generation: number; reminderNo: number } | null {
	const m = key.match(/^review:(\d+):r(\d+):u(\d+)(?:\.(\d+))?:(\d+)$/);
	if (!m) return null;
	return { protocolId: +m[1], round: +m[2], reviewerId: +m[3], generation: m[4] ? +m[4] : 1, reminderNo: +m[5] };
}

/**
 * What a review e-mail says: the subject, the plain-text part (a plain function) and the HTML part
 * (./ReviewMail.svelte rendered on the server, so every value is escaped by construction). Pure: the
 * caller passes the content and the clock (`now`), so tests render a message without any service.
 *
 * The worker runs under tsx, which does not compile .svelte: scripts/worker.ts registers
 * scripts/lib/svelte-hooks.js (module.register) before it imports this module. Under Vite (the app,
 * vitest) the Svelte plugin compiles the components.
 *
 * E-mails name protocols by the examinee's pseudonymous code only: never a name or birth date.
 */
import { mailDocument } from '../document';
import ReviewMail from './ReviewMail.svelte';
import { charDiff, type DiffSegment } from '../../../scoring/diff';
import { KIND_EXPLANATIONS, kindName as vocabularyKindName, type Kind } from '../../../scoring/kinds';
import { FIELD_LABELS, fieldWords, passWords } from '../../../status';
import { dateTimeIn } from '../../../dates';
import { passValues } from '../../protocols/decisions';
import type { DiscrepancyRow } from '../../models/protocol';
import type { MailDetail } from './settings';
import type { ReviewMailPayload } from './keys';

/** The columns of an open discrepancy a message shows (a `discrepancies` row, plus its test's name). */
export type MailDiscrepancy = Pick<DiscrepancyRow, 'test_code' | 'field' | 'pass' | 'kind' | 'value' | 'other' | 'expected' | 'out_of_range'> & {
	test_name: string | null;
};

export interface ReviewMailContent {
	reminderNo: number;
	code: string;
	link: string;
	reviewerName: string;
	battery: string | null;
	testDate: string;
	discrepancies: MailDiscrepancy[];
	escalated: boolean;
	intervalMinutes: number;
	/** `counts`: no values in the message, only how many of each kind and the link. Default `full`. */
	detail?: MailDetail;
	/** The review round, and why it was opened (reopen or amendment) when it is not the first. */
	round?: number;
	why?: ReviewMailPayload['why'];
	/** When the protocol reached review (`status_changed_at`): reminders say how long it has waited. */
	since?: Date | null;
	/** The zone times are written in (the clinic's, CLINIC_TIME_ZONE). */
	timeZone: string;
}

/** Field names in a sentence: the same words as the screens (src/lib/status.ts). */
export const FIELD_WORDS: Record<string, string> = Object.fromEntries(Object.keys(FIELD_LABELS).map((f) => [f, fieldWords(f)]));

/** The kind's name as the Review chip shows it ("Digits swapped"): one list, src/lib/scoring/kinds.ts. */
export function kindName(kind: string): string {
	return vocabularyKindName(kind);
}

export function kindWords(kind: string): string {
	return KIND_EXPLANATIONS[kind as Kind] ?? 'Differs, with no recognisable pattern.';
}

/** One entered value with the characters the other pass lacks marked. */
export type Marked = { empty: true } | { empty: false; segments: { text: string; marked: boolean }[] };

/** The first and second value, each with the characters the other lacks marked. */
export function markedValues(first: string | null, second: string | null): [Marked, Marked] {
	const segs: DiffSegment[] = charDiff(first ?? '', second ?? '');
	const side = (value: string | null, drop: DiffSegment['kind']): Marked =>
		value === null || value === ''
			? { empty: true }
			: { empty: false, segments: segs.filter((s) => s.kind !== drop).map((s) => ({ text: s.text, marked: s.kind !== 'same' })) };
	return [side(first, 'added'), side(second, 'removed')];
}

/** A marked value in plain text: `4[7]`, or `(empty)`. */
export const markedText = (m: Marked) => (m.empty ? '(empty)' : m.segments.map((s) => (s.marked ? `[${s.text}]` : s.text)).join(''));

const plural = (n: number, one: string, many = `${one}s`) => `${n} ${n === 1 ? one : many}`;

/** "3 (2 Digits swapped, 1 Wrong digit)": how many, by kind name, no values. */
function countsByKind(list: Pick<MailDiscrepancy, 'kind'>[]): string {
	const by = new Map<string, number>();
	for (const d of list) by.set(d.kind, (by.get(d.kind) ?? 0) + 1);
	return `${list.length} (${[...by].map(([k, m]) => `${m} ${kindName(k)}`).join(', ')})`;
}

function everyWords(minutes: number): string {
	if (minutes >= 1440 && minutes % 1440 === 0) return minutes === 1440 ? 'every day' : `every ${minutes / 1440} days`;
	if (minutes >= 60 && minutes % 60 === 0) return minutes === 60 ? 'every hour' : `every ${minutes / 60} hours`;
	if (minutes >= 1) return `every ${+minutes.toFixed(1)} minutes`;
	return `every ${Math.round(minutes * 60)} seconds`;
}

/** How long, in the largest whole unit: "3 days", "1 hour", "40 minutes", "less than a minute". */
export function waitedWords(ms: number): string {
	const minutes = Math.floor(ms / 60_000);
	if (minutes < 1) return 'less than a minute';
	if (minutes < 60) return plural(minutes, 'minute');
	const hours = Math.floor(minutes / 60);
	if (hours < 24) return plural(hours, 'hour');
	return plural(Math.floor(hours / 24), 'day');
}

export function subjectOf(c: Pick<ReviewMailContent, 'reminderNo' | 'code' | 'discrepancies' | 'escalated' | 'round'>): string {
	const n = c.discrepancies.length;
	// a later round (reopened or amended) says so in the subject: the inbox otherwise shows it as a copy of the first
	const again = (c.round ?? 1) > 1 ? ` again (round ${c.round})` : '';
	if (c.reminderNo === 0)
		return n === 0
			? `Sign-off needed${again}: protocol ${c.code} (no discrepancies)`
			: `Review needed${again}: protocol ${c.code} (${plural(n, 'discrepancy', 'discrepancies')})`;
	const round = (c.round ?? 1) > 1 ? ` (round ${c.round})` : '';
	return `${c.escalated ? 'Escalated reminder' : 'Reminder'} ${c.reminderNo}${round}: protocol ${c.code} has ${plural(n, 'open discrepancy', 'open discrepancies')}`;
}

export interface MailRow {
	no: number;
	/** "Word Recall (wr)": the test's name and code. */
	test: string;
	field: string;
	pass: string;
	first: Marked;
	second: Marked;
	expected: string;
	/** No recomputed value: `expected` is the reason, in words. */
	expectedMissing: boolean;
	kind: string;
	outOfRange: boolean;
	kindWords: string;
}

/** The words of a message, worked out once for both parts. */
export interface ReviewMailView {
	subject: string;
	reviewerName: string;
	intro: string;
	roundWords: string;
	escalation: string;
	/** Reminders: "Waiting for review since … (2 days)." */
	waiting: string;
	facts: string[];
	/** Detail `counts`: the one sentence that replaces the list (empty otherwise). */
	counts: string;
	rows: MailRow[];
	link: string;
	schedule: string;
}

/** The message's words at `now` (the clock is the caller's: the worker passes the time it renders). */
export function reviewMailView(c: ReviewMailContent, now: Date): ReviewMailView {
	const n = c.discrepancies.length;
	const intro =
		c.reminderNo === 0
			? n === 0
				? `Protocol ${c.code} is ready for review: both passes and the recomputation agree everywhere. It needs your sign-off.`
				: `Protocol ${c.code} is ready for review: ${plural(n, 'discrepancy needs', 'discrepancies need')} your decision.`
			: `Reminder ${c.reminderNo}: protocol ${c.code} still has ${plural(n, 'open discrepancy', 'open discrepancies')}.`;
	const roundWords =
		c.round && c.round > 1 && c.why
			? c.why.action === 'reopen'
				? `It was reopened for review round ${c.round}. Reason: ${c.why.reason}`
				: `It was amended (${c.why.field ?? 'one field'}) and needs review round ${c.round}. Reason: ${c.why.reason}`
			: '';
	const escalation = c.escalated ? `The leads are copied in because this protocol has had ${plural(c.reminderNo - 1, 'reminder')} without being resolved.` : '';
	const waiting =
		c.reminderNo > 0 && c.since ? `Waiting for review since ${dateTimeIn(c.since, c.timeZone)} (${waitedWords(now.getTime() - c.since.getTime())}).` : '';
	const next = new Date(now.getTime() + Math.round(c.intervalMinutes * 60_000));
	const schedule =
		n > 0 ? `Until every discrepancy is resolved, a reminder goes out ${everyWords(c.intervalMinutes)}; the next is due ${dateTimeIn(next, c.timeZone)}.` : '';
	const date = typeof c.testDate === 'string' ? c.testDate : '';
	const facts = [`Protocol: ${c.code}`, c.battery ? `Battery: ${c.battery}` : null, date ? `Test date: ${date}` : null].filter((f): f is string => !!f);
	const counts =
		n > 0 && c.detail === 'counts'
			? `${c.reminderNo === 0 ? 'Discrepancies' : 'Still open'}: ${countsByKind(c.discrepancies)}. The values are on the Review screen (this site keeps scores out of e-mail).`
			: '';
	const rows = c.discrepancies.map((d, i): MailRow => {
		const { first, second } = passValues(d);
		const [m1, m2] = markedValues(first, second);
		return {
			no: i + 1,
			test: d.test_name ? `${d.test_name} (${d.test_code})` : d.test_code,
			field: FIELD_WORDS[d.field] ?? d.field,
			// whom the row is about in the Review screen's words (passWords): two different values say "one or both may be
			// wrong", never that both passes are; "both passes" only where both wrote the same value (or nothing)
			pass: passWords({ pass: d.pass, first, second }).label,
			first: m1,
			second: m2,
			expected: d.expected ?? (d.field === 'raw' ? 'none for raw scores' : 'none (raw score missing or out of range)'),
			expectedMissing: d.expected === null,
			kind: kindName(d.kind),
			outOfRange: !!d.out_of_range,
			kindWords: kindWords(d.kind)
		};
	});
	return { subject: subjectOf(c), reviewerName: c.reviewerName, intro, roundWords, escalation, waiting, facts, counts, rows, link: c.link, schedule };
}

/** The plain-text part. */
export function reviewMailText(v: ReviewMailView, reminderNo: number): string {
	const list = v.rows
		.map(
			(r) =>
				`${r.no}. ${r.test}, ${r.field} (${r.pass})
   First pass:  ${markedText(r.first)}
   Second pass: ${markedText(r.second)}
   Recomputed:  ${r.expected}
   Kind: ${r.kind}${r.outOfRange ? ' (out of range)' : ''}: ${r.kindWords}`
		)
		.join('\n\n');
	return [
		`Hello ${v.reviewerName},`,
		'',
		v.intro,
		v.roundWords,
		v.escalation,
		v.waiting,
		'',
		v.facts.join('\n'),
		'',
		v.counts ||
			(v.rows.length ? `${reminderNo === 0 ? 'Discrepancies' : 'Still open'} (characters that differ between the passes are in [brackets]):\n\n${list}` : ''),
		'',
		`Open the Review screen: ${v.link}`,
		'',
		v.schedule
	]
		.filter((l, i, all) => !(l === '' && all[i - 1] === ''))
		.join('\n')
		.trim();
}

/** The HTML part: ./ReviewMail.svelte rendered on the server. */
export function reviewMailHtml(v: ReviewMailView): string {
	return mailDocument(ReviewMail, { view: v });
}

/** Subject, plain text and HTML of a review message at `now`. */
export function reviewMailBody(c: ReviewMailContent, now: Date): { subject: string; text: string; html: string } {
	const v = reviewMailView(c, now);
	return { subject: v.subject, text: reviewMailText(v, c.reminderNo), html: reviewMailHtml(v) };
}

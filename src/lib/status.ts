import { dateTimeIn, dateIn } from './dates';
import { KIND_NAMES } from './scoring/kinds';
/** Protocol statuses in words, with the icon used everywhere (never colour alone). Client-safe. */
export const STATUS: Record<string, { label: string; icon: string; tone: 'neutral' | 'attention' | 'verified' }> = {
	draft: { label: 'First pass', icon: 'draft', tone: 'neutral' },
	awaiting_second: { label: 'Second pass', icon: 'pen', tone: 'neutral' },
	in_review: { label: 'In review', icon: 'review', tone: 'attention' },
	verified: { label: 'Verified', icon: 'check', tone: 'verified' }
};

export const FIELD_LABELS: Record<string, string> = {
	raw: 'Raw score',
	z: 'z-score',
	standard: 'Standard score',
	scaled: 'Scaled score',
	t: 'T-score',
	percentile: 'Percentile',
	sum: 'Sum of parts'
};

/** A field's name inside a sentence ("raw score", "T-score"): the same words, lower-case where English wants it. */
export function fieldWords(field: string): string {
	const l = FIELD_LABELS[field];
	return l ? l.replace(/^(Raw|Standard|Scaled|Percentile|Sum)/, (w) => w.toLowerCase()) : field;
}

/** A status in words ("Second pass"), never the internal code. */
export function statusWords(status: unknown): string {
	return STATUS[String(status)]?.label ?? String(status ?? '');
}

export const FIELD_SHORT: Record<string, string> = { raw: 'Raw', z: 'z', standard: 'SS', scaled: 'ScS', t: 'T', percentile: '%ile', sum: 'Sum' };

/** Kind names come from the one list in src/lib/scoring/kinds.ts (the issue-14 kinds included). */
export const KIND_LABELS: Readonly<Record<string, string>> = KIND_NAMES;

/** Age of an item in words: "3 h", "2 d". */
export function ageOf(since: string | Date, now = new Date()): string {
	const ms = now.getTime() - new Date(since).getTime();
	const m = Math.max(0, Math.round(ms / 60_000));
	if (m < 60) return `${m} min`;
	const h = Math.round(m / 60);
	if (h < 48) return `${h} h`;
	return `${Math.round(h / 24)} d`;
}

/**
 * Dates as ISO (YYYY-MM-DD) and times as 24-hour HH:MM in the clinic's time zone (every page has it
 * as `page.data.timeZone`), with the zone's offset written out: unambiguous on any printout, and the
 * same on the server and in the browser.
 */
export function isoDateTime(d: string | Date | null | undefined, timeZone: string): string {
	return dateTimeIn(d, timeZone);
}
export function isoDate(d: string | Date | null | undefined, timeZone: string): string {
	return dateIn(d, timeZone);
}

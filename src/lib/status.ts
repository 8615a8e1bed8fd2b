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

/**
 * Whom a discrepancy is about, in words a reviewer reads right. `pass: 'both'` has two meanings
 * (reconcile.md): the two passes wrote different values and nobody knows yet which is right (a raw
 * score that differs, a derived value without a reference), or both passes wrote the same value and
 * the recomputation says it is wrong (a shared error). Only the second means both scorers erred.
 */
export function passWords(d: { pass: 'first' | 'second' | 'both'; first: string | null; second: string | null }): { label: string; title: string } {
	if (d.pass === 'first' || d.pass === 'second')
		return { label: `${d.pass} pass`, title: `The ${d.pass} pass’s value is in question; the other pass agrees with the recomputation or has no value here.` };
	const same = (d.first ?? '').trim() === (d.second ?? '').trim();
	if (same)
		return d.first === null || d.first.trim() === ''
			? { label: 'empty in both passes', title: 'Neither pass entered this field.' }
			: {
					label: 'same value in both passes',
					title: 'Both passes wrote this value and the checks say it is wrong (outside the test’s range, or not what the recomputation gives): a shared error.'
				};
	return {
		label: 'the passes disagree: one or both may be wrong',
		title: 'The two passes wrote different values and nothing yet says which is right. Check the record form.'
	};
}

/**
 * The confirmation after a scorer submits a pass (the protocol page, `?submitted=first|second`): what
 * was submitted and what happens next. Before the second pass is in, nothing of the other pass is
 * told (the blind rule): only who enters it and that it is compared afterwards.
 */
export function submittedWords(
	which: 'first' | 'second',
	p: { status: string; singlePass: boolean; fieldsEntered: number; second: string; reviewer: string; discrepancies: number }
): { title: string; next: string } {
	const fields = `${p.fieldsEntered} field${p.fieldsEntered === 1 ? '' : 's'}`;
	const title = `${which === 'first' ? 'First' : 'Second'} pass submitted and locked (${fields} entered).`;
	if (which === 'first' && p.singlePass)
		return {
			title,
			next: `Not drawn for a second pass: your pass was checked against the recomputation, and ${p.reviewer} now reviews what it found and signs off.`
		};
	if (which === 'first' && p.status !== 'in_review' && p.status !== 'verified')
		return {
			title,
			next: `Next: ${p.second} enters the second pass blind, without seeing yours. When both passes are in, they are compared field by field and ${p.reviewer} reviews any difference.`
		};
	const found =
		p.discrepancies === 0
			? 'they agree with each other and with the recomputation everywhere'
			: `${p.discrepancies} discrepanc${p.discrepancies === 1 ? 'y was' : 'ies were'} found`;
	return {
		title,
		next: `Both passes are in and were compared: ${found}. ${p.reviewer} reviews ${p.discrepancies === 0 ? 'and signs off' : 'them against the record form'}.`
	};
}

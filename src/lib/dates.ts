/**
 * The one date module, client-safe: calendar dates (strict YYYY-MM-DD parsing, day arithmetic, ISO
 * weeks — through date-fns) and clock times for the screens. Every form and query that takes a date
 * checks it through `isoDateField` below (impossible dates such as 2023-02-30 refused). The age at
 * testing is the scoring module's own (`src/lib/scoring/age.ts`: the record-form borrowing of days
 * and months, which no date library does).
 *
 * Times are shown in the clinic's time zone (CLINIC_TIME_ZONE, passed to every page by the root
 * layout), never in the browser's or the server's by accident, and always with the zone named.
 */
import { z } from 'zod';
import { addDays as addCalendarDays, format, startOfISOWeek } from 'date-fns';
import { parseIsoDate } from './scoring/age';

const ISO_DAY = 'yyyy-MM-dd';

/**
 * A calendar date written YYYY-MM-DD as a Date at local midnight (only its calendar fields are used,
 * so the machine's zone never shifts the day), or null. Strict: `2023-02-30` and `2023-1-5` are
 * refused. The check is the scoring module's (parseIsoDate), not date-fns's `parse`: that pattern
 * parser put the Entry page's JavaScript over its 100 KB budget (103.1 KB gzip in the bench).
 */
function calendarDay(s: string): Date | null {
	try {
		const d = parseIsoDate(s);
		// setFullYear, not new Date(y, m, d): the constructor reads years 0-99 as 1900-1999
		const out = new Date(2000, 0, 1);
		out.setFullYear(d.year, d.month - 1, d.day);
		return out;
	} catch {
		return null;
	}
}

function day(s: string): Date {
	const d = calendarDay(s);
	if (!d) throw new RangeError(`not a calendar date written YYYY-MM-DD: ${JSON.stringify(s)}`);
	return d;
}

/** True for a real calendar date written YYYY-MM-DD. */
export function isIsoDate(s: string): boolean {
	return calendarDay(s) !== null;
}

/** The calendar date `n` days after (or before, n < 0) a YYYY-MM-DD date. */
export function addDays(iso: string, n: number): string {
	return format(addCalendarDays(day(iso), n), ISO_DAY);
}

/** The Monday of the ISO 8601 week holding a YYYY-MM-DD date. */
export function mondayOf(iso: string): string {
	return format(startOfISOWeek(day(iso)), ISO_DAY);
}

/** The ISO 8601 week of a YYYY-MM-DD date, written `2020-W53` (week-numbering year, two-digit week). */
export function isoWeek(iso: string): string {
	return format(day(iso), "RRRR-'W'II");
}

/** The UTC calendar day of an instant (a DATETIME read from the database), or a DATE column's text. */
export function utcDay(v: Date | string): string {
	return v instanceof Date ? v.toISOString().slice(0, 10) : String(v).slice(0, 10);
}

/** What is wrong with a date as typed, or null when it is a real calendar date. */
export function dateProblem(s: string): string | null {
	if (!/^\d{4}-\d{2}-\d{2}$/.test(s)) return 'Use a date written YYYY-MM-DD.';
	return isIsoDate(s) ? null : `${s} does not exist (check the day and the month).`;
}

const checkDate = (s: string, ctx: z.RefinementCtx) => {
	const problem = dateProblem(s);
	if (problem) ctx.addIssue({ code: 'custom', message: problem });
};

/** A form or query field holding a calendar date. */
export const isoDateField = z.string().superRefine(checkDate);
/** The same, where an empty field means "not given". */
export const optionalIsoDateField = z.string().superRefine((s, ctx) => (s === '' ? undefined : checkDate(s, ctx)));

/** True when `timeZone` is an IANA zone name this runtime knows (e.g. Europe/Vienna). */
export function isTimeZone(timeZone: string): boolean {
	try {
		new Intl.DateTimeFormat('en-US', { timeZone });
		return true;
	} catch {
		return false;
	}
}

// One formatter per zone: building an Intl.DateTimeFormat costs far more than formatting with it, and
// "today in the clinic's zone" is asked on most requests (it showed in the app's CPU profile under load).
const formatters = new Map<string, Intl.DateTimeFormat>();
function formatter(timeZone: string): Intl.DateTimeFormat {
	let f = formatters.get(timeZone);
	if (!f) {
		f = new Intl.DateTimeFormat('en-US', {
			timeZone,
			year: 'numeric',
			month: '2-digit',
			day: '2-digit',
			hour: '2-digit',
			minute: '2-digit',
			hourCycle: 'h23',
			timeZoneName: 'shortOffset'
		});
		formatters.set(timeZone, f);
	}
	return f;
}

function parts(d: Date, timeZone: string) {
	const f = formatter(timeZone);
	const out: Record<string, string> = {};
	for (const p of f.formatToParts(d)) out[p.type] = p.value;
	return out;
}

/** The calendar date at instant `now` in `timeZone`, as YYYY-MM-DD. */
export function todayIn(timeZone: string, now: Date = new Date()): string {
	const p = parts(now, timeZone);
	return `${p.year}-${p.month}-${p.day}`;
}

/** `2026-12-02 14:05 GMT+1`: 24-hour time in the clinic's zone, the zone's offset written out. */
export function dateTimeIn(d: string | Date | null | undefined, timeZone: string): string {
	if (!d) return '—';
	const x = new Date(d);
	if (Number.isNaN(x.getTime())) return '—';
	const p = parts(x, timeZone);
	return `${p.year}-${p.month}-${p.day} ${p.hour}:${p.minute} ${p.timeZoneName}`;
}

/** The date part only (YYYY-MM-DD) in the clinic's zone. */
export function dateIn(d: string | Date | null | undefined, timeZone: string): string {
	if (!d) return '—';
	const x = new Date(d);
	return Number.isNaN(x.getTime()) ? '—' : todayIn(timeZone, x);
}

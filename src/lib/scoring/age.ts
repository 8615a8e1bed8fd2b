/**
 * Chronological age at testing and norm-group selection.
 *
 * Works on ISO calendar dates (YYYY-MM-DD) as plain numbers, never through Date objects, so there is
 * no time zone in play: a date typed in Auckland is the same date in Honolulu.
 */

export interface CivilDate {
	year: number;
	month: number; // 1–12
	day: number; // 1–31
}

/**
 * How a norm set wants age computed; instruments differ, so this is a per-norm-set setting.
 * - `borrowDays`: when the test day is before the birth day, a month is borrowed and turned into
 *   days: 30 (the usual hand-calculation rule on record forms) or `'actual'`, the number of days in
 *   the month before the test month (which equals counting on the calendar from the last monthly
 *   birthday). A borrow that still leaves days negative (birth on the 31st, test early in March)
 *   borrows again from the month before.
 * - `rounding`: `'truncate'` drops the days (age 7;11;29 is 7 years 11 months); `'round_days'` rounds
 *   up to the next month when days ≥ `roundUpFromDay` (15 by default).
 */
export interface AgeRule {
	borrowDays: 30 | 'actual';
	rounding: 'truncate' | 'round_days';
	roundUpFromDay?: number;
}

export const DEFAULT_AGE_RULE: AgeRule = { borrowDays: 30, rounding: 'truncate' };

export interface Age {
	years: number;
	months: number;
	days: number;
	/** Whole months after the rounding rule: what norm tables are looked up by. */
	totalMonths: number;
	/** Written as practitioners do: `7;11;29`. */
	text: string;
}

const ISO = /^(\d{4})-(\d{2})-(\d{2})$/;

export function isLeapYear(y: number): boolean {
	return (y % 4 === 0 && y % 100 !== 0) || y % 400 === 0;
}

export function daysInMonth(year: number, month: number): number {
	return month === 2 ? (isLeapYear(year) ? 29 : 28) : [4, 6, 9, 11].includes(month) ? 30 : 31;
}

/** Parse `YYYY-MM-DD`; throws on anything else or on an impossible date (2023-02-29). */
export function parseIsoDate(s: string): CivilDate {
	const m = ISO.exec(s);
	if (!m) throw new RangeError(`not a date in the form YYYY-MM-DD: ${JSON.stringify(s)}`);
	const d = { year: Number(m[1]), month: Number(m[2]), day: Number(m[3]) };
	if (d.month < 1 || d.month > 12 || d.day < 1 || d.day > daysInMonth(d.year, d.month)) {
		throw new RangeError(`no such date: ${s}`);
	}
	return d;
}

export function formatIsoDate(d: CivilDate): string {
	return `${String(d.year).padStart(4, '0')}-${String(d.month).padStart(2, '0')}-${String(d.day).padStart(2, '0')}`;
}

/** Days since 1970-01-01 in the proleptic Gregorian calendar (H. Hinnant's days_from_civil). */
export function dayNumber({ year, month, day }: CivilDate): number {
	const y = month <= 2 ? year - 1 : year;
	const era = Math.floor(y / 400);
	const yoe = y - era * 400;
	const mp = (month + 9) % 12;
	const doy = Math.floor((153 * mp + 2) / 5) + day - 1;
	const doe = yoe * 365 + Math.floor(yoe / 4) - Math.floor(yoe / 100) + doy;
	return era * 146097 + doe - 719468;
}

/** Inverse of dayNumber. */
export function fromDayNumber(n: number): CivilDate {
	const z = n + 719468;
	const era = Math.floor(z / 146097);
	const doe = z - era * 146097;
	const yoe = Math.floor((doe - Math.floor(doe / 1460) + Math.floor(doe / 36524) - Math.floor(doe / 146096)) / 365);
	const doy = doe - (365 * yoe + Math.floor(yoe / 4) - Math.floor(yoe / 100));
	const mp = Math.floor((5 * doy + 2) / 153);
	const day = doy - Math.floor((153 * mp + 2) / 5) + 1;
	const month = mp < 10 ? mp + 3 : mp - 9;
	return { year: yoe + era * 400 + (month <= 2 ? 1 : 0), month, day };
}

export function addDays(iso: string, n: number): string {
	return formatIsoDate(fromDayNumber(dayNumber(parseIsoDate(iso)) + n));
}

/** Today's local calendar date as ISO (the only place a clock is read; callers may pass `today` instead). */
export function localToday(): string {
	const d = new Date();
	return formatIsoDate({ year: d.getFullYear(), month: d.getMonth() + 1, day: d.getDate() });
}

/**
 * Chronological age on the test date, by column subtraction with borrowing as on a record form:
 *     test   2024;03;05
 *     birth  2016;04;20
 * days 5 − 20 < 0: borrow a month (30 days, or the days of February 2024 under `'actual'`), months
 * 2 − 4 < 0: borrow a year. Throws if the test date is before the birth date.
 */
export function chronologicalAge(birthIso: string, testIso: string, rule: AgeRule = DEFAULT_AGE_RULE): Age {
	const b = parseIsoDate(birthIso);
	const t = parseIsoDate(testIso);
	if (dayNumber(t) < dayNumber(b)) throw new RangeError(`test date ${testIso} is before birth date ${birthIso}`);
	let years = t.year - b.year;
	let months = t.month - b.month;
	let days = t.day - b.day;
	// the month days are borrowed from: the one before the test month, then earlier ones
	let bm = t.month - 1;
	let by = t.year;
	while (days < 0) {
		if (bm < 1) {
			bm = 12;
			by -= 1;
		}
		days += rule.borrowDays === 30 ? 30 : daysInMonth(by, bm);
		months -= 1;
		bm -= 1;
	}
	while (months < 0) {
		months += 12;
		years -= 1;
	}
	let totalMonths = years * 12 + months;
	if (rule.rounding === 'round_days' && days >= (rule.roundUpFromDay ?? 15)) totalMonths += 1;
	return { years, months, days, totalMonths, text: `${years};${months};${days}` };
}

export interface NormGroupDef {
	id: string;
	/** Age range in whole months, inclusive at both ends (e.g. 360–479 for 30;0 to 39;11). */
	minMonths: number;
	maxMonths: number;
	/** When set, the group applies only to this sex. */
	sex?: string;
	/** When set, years of education, inclusive. */
	education?: readonly [number, number];
}

/** Age in months as years;months ("30;0", "39;11"). */
const ym = (m: number) => `${Math.floor(m / 12)};${m % 12}`;

/**
 * A norm group as people read it, by what it covers: "ages 30;0–39;11, 13+ years of education"
 * (never its internal code). Education 0 as the lower bound or 99 as the upper one means "open".
 */
export function groupCoverage(g: Pick<NormGroupDef, 'minMonths' | 'maxMonths' | 'sex' | 'education'> | null | undefined): string {
	if (!g) return 'no group';
	const parts = [`ages ${ym(g.minMonths)}–${ym(g.maxMonths)}`];
	if (g.sex === 'F') parts.push('women');
	else if (g.sex === 'M') parts.push('men');
	if (g.education) {
		const [lo, hi] = g.education;
		if (lo > 0 && hi >= 99) parts.push(`${lo}+ years of education`);
		else if (lo <= 0 && hi < 99) parts.push(`up to ${hi} years of education`);
		else if (lo > 0 || hi < 99) parts.push(lo === hi ? `${lo} years of education` : `${lo}–${hi} years of education`);
	}
	return parts.join(', ');
}

export interface Examinee {
	sex?: string | null;
	educationYears?: number | null;
}

export type AgeWarning =
	| { code: 'test_date_in_future'; message: string }
	| { code: 'near_boundary'; message: string; otherGroup: string | null; days: number }
	| { code: 'no_group'; message: string };

export interface GroupSelection {
	age: Age;
	group: NormGroupDef | null;
	warnings: AgeWarning[];
}

function matches(g: NormGroupDef, months: number, who: Examinee): boolean {
	if (months < g.minMonths || months > g.maxMonths) return false;
	if (g.sex != null && who.sex != null && g.sex !== who.sex) return false;
	if (g.sex != null && who.sex == null) return false;
	if (g.education) {
		const e = who.educationYears;
		if (e == null || e < g.education[0] || e > g.education[1]) return false;
	}
	return true;
}

/** The matching group; when several match, the most specific (sex and education set) wins, then the first listed. */
export function pickGroup(groups: readonly NormGroupDef[], months: number, who: Examinee = {}): NormGroupDef | null {
	let best: NormGroupDef | null = null;
	let bestScore = -1;
	for (const g of groups) {
		if (!matches(g, months, who)) continue;
		const score = (g.sex != null ? 1 : 0) + (g.education ? 1 : 0);
		if (score > bestScore) {
			best = g;
			bestScore = score;
		}
	}
	return best;
}

export interface SelectOptions {
	rule?: AgeRule;
	/** Warn when a test date this many days earlier or later would select another group (default 7). */
	nearDays?: number;
	/** Today's date, ISO; defaults to the local calendar date. */
	today?: string;
}

/**
 * Age at testing and the norm group it selects, with warnings: the test date is in the future, no
 * group fits, or the age is within `nearDays` of a group boundary (tested by moving the test date
 * `nearDays` back and forward and seeing whether another group would be chosen).
 */
export function selectNormGroup(
	birthIso: string,
	testIso: string,
	groups: readonly NormGroupDef[],
	who: Examinee = {},
	opts: SelectOptions = {}
): GroupSelection {
	const rule = opts.rule ?? DEFAULT_AGE_RULE;
	const near = opts.nearDays ?? 7;
	const age = chronologicalAge(birthIso, testIso, rule);
	const group = pickGroup(groups, age.totalMonths, who);
	const warnings: AgeWarning[] = [];
	const today = opts.today ?? localToday();
	if (dayNumber(parseIsoDate(testIso)) > dayNumber(parseIsoDate(today))) {
		warnings.push({ code: 'test_date_in_future', message: `The test date ${testIso} is after today (${today}).` });
	}
	if (!group) {
		warnings.push({ code: 'no_group', message: `No norm group covers age ${age.text} (${age.totalMonths} months) for this examinee.` });
	}
	if (near > 0) {
		// Walk day by day away from the test date, in each direction, to the first day that selects
		// another group: the warning names that many days (not the search window), once per change.
		const seen = new Set<string>();
		for (const sign of [-1, 1]) {
			for (let d = 1; d <= near; d++) {
				const other = addDays(testIso, sign * d);
				if (dayNumber(parseIsoDate(other)) < dayNumber(parseIsoDate(birthIso))) break;
				const g = pickGroup(groups, chronologicalAge(birthIso, other, rule).totalMonths, who);
				if ((g?.id ?? null) === (group?.id ?? null)) continue;
				const key = g?.id ?? '';
				if (!seen.has(key)) {
					seen.add(key);
					const when = `${d} day${d === 1 ? '' : 's'} ${sign < 0 ? 'earlier' : 'later'}`;
					warnings.push({
						code: 'near_boundary',
						otherGroup: g?.id ?? null,
						days: d,
						message: `Age ${age.text} is close to a norm-group boundary: a test date ${when} would use ${g ? `the group for ${groupCoverage(g)}` : 'no group'}${group ? ` instead of ${groupCoverage(group)}` : ''}. Check the birth and test dates.`
					});
				}
				break;
			}
		}
	}
	return { age, group, warnings };
}

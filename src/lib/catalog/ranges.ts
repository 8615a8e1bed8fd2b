/**
 * Age ranges of norm groups: for one test and one set of keys (sex, education band), the groups'
 * age ranges (months, inclusive) must neither overlap nor leave a gap. Pure; runs anywhere.
 */
import { groupCoverage } from '../scoring/age';

export interface RangeRow {
	/** How the row is named in messages: a CSV line ("line 14") or a group code ("group a30"). */
	label: string;
	test_code: string;
	group_code: string;
	age_min_months: number;
	age_max_months: number;
	sex: string | null;
	edu_min: number | null;
	edu_max: number | null;
}

export interface RangeProblem {
	kind: 'overlap' | 'gap' | 'duplicate';
	/** The rows concerned, in file/age order. */
	rows: [string, string];
	test_code: string;
	message: string;
}

export function keyOf(r: Pick<RangeRow, 'test_code' | 'sex' | 'edu_min' | 'edu_max'>): string {
	return `${r.test_code}|${r.sex ?? ''}|${r.edu_min ?? ''}-${r.edu_max ?? ''}`;
}

export function describeKeys(r: Pick<RangeRow, 'sex' | 'edu_min' | 'edu_max'>): string {
	const parts: string[] = [];
	if (r.sex) parts.push(`sex ${r.sex}`);
	if (r.edu_min !== null && r.edu_max !== null) parts.push(`education ${r.edu_min}–${r.edu_max} y`);
	return parts.length ? ` (${parts.join(', ')})` : '';
}

/**
 * A norm group as people read it, by what it covers ("ages 30;0–39;11, 13+ years of education"),
 * from its catalog row: the same words as Review and the Summary (`groupCoverage`), never its code.
 */
export function groupWords(r: Pick<RangeRow, 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>): string {
	return groupCoverage({
		minMonths: r.age_min_months,
		maxMonths: r.age_max_months,
		...(r.sex ? { sex: r.sex } : {}),
		...(r.edu_min !== null || r.edu_max !== null ? { education: [r.edu_min ?? 0, r.edu_max ?? 99] as const } : {})
	});
}

export function monthsText(m: number): string {
	return `${Math.floor(m / 12)};${m % 12}`;
}

/**
 * Overlaps, gaps and duplicates among the rows, each naming both rows. Rows that repeat a
 * (test, group code) pair are duplicates whatever their ages.
 */
export function rangeProblems(rows: readonly RangeRow[]): RangeProblem[] {
	const problems: RangeProblem[] = [];
	const byCode = new Map<string, RangeRow>();
	for (const r of rows) {
		const k = `${r.test_code}|${r.group_code}`;
		const prev = byCode.get(k);
		if (prev) {
			problems.push({
				kind: 'duplicate',
				rows: [prev.label, r.label],
				test_code: r.test_code,
				message: `Duplicate row: ${r.label} repeats group ${r.group_code} of ${r.test_code} (first at ${prev.label})`
			});
		} else byCode.set(k, r);
	}
	const byKey = new Map<string, RangeRow[]>();
	for (const r of byCode.values()) {
		const k = keyOf(r);
		const list = byKey.get(k);
		if (list) list.push(r);
		else byKey.set(k, [r]);
	}
	for (const list of byKey.values()) {
		list.sort((a, b) => a.age_min_months - b.age_min_months || a.age_max_months - b.age_max_months);
		for (let i = 1; i < list.length; i++) {
			const a = list[i - 1];
			const b = list[i];
			const keys = describeKeys(b);
			if (b.age_min_months <= a.age_max_months) {
				problems.push({
					kind: 'overlap',
					rows: [a.label, b.label],
					test_code: b.test_code,
					message: `Age ranges overlap for ${b.test_code}${keys}: ${a.label} (${groupWords(a)}; ${a.age_min_months}–${a.age_max_months} months) and ${b.label} (${groupWords(b)}; ${b.age_min_months}–${b.age_max_months} months)`
				});
			} else if (b.age_min_months > a.age_max_months + 1) {
				problems.push({
					kind: 'gap',
					rows: [a.label, b.label],
					test_code: b.test_code,
					message: `Age gap for ${b.test_code}${keys}: nothing covers ${a.age_max_months + 1}–${b.age_min_months - 1} months (${monthsText(a.age_max_months + 1)} to ${monthsText(b.age_min_months - 1)}) between ${a.label} (${groupWords(a)}) and ${b.label} (${groupWords(b)})`
				});
			}
		}
	}
	return problems;
}

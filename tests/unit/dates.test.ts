/**
 * The date module (src/lib/dates.ts). Expected values are calendar facts worked out by hand:
 * 2023 is not a leap year (not divisible by 4), 2024 is (divisible by 4, not by 100); ISO 8601
 * weeks start on Monday and week 1 holds the year's first Thursday (ISO 8601-1:2019, 3.2.2 / 5.2.4.1).
 */
import { describe, expect, it } from 'vitest';
import { addDays, dateProblem, isIsoDate, isoWeek, mondayOf, utcDay } from '../../src/lib/dates';

describe('strict calendar dates', () => {
	it('accepts real dates and refuses impossible or loosely written ones', () => {
		expect(isIsoDate('2024-02-29')).toBe(true); // 2024 is a leap year
		expect(isIsoDate('2023-02-28')).toBe(true);
		for (const s of ['2023-02-29', '2023-02-30', '2023-04-31', '2023-13-01', '2023-00-10', '2023-1-05', '2023-01-5', '20230105', '2023-01-05T00:00', ''])
			expect(isIsoDate(s), s).toBe(false);
		expect(dateProblem('2023-02-30')).toBe('2023-02-30 does not exist (check the day and the month).');
		expect(dateProblem('5 Jan 2023')).toBe('Use a date written YYYY-MM-DD.');
	});
});

describe('day arithmetic (whatever the machine zone)', () => {
	it('adds and subtracts days across month, year and leap-day boundaries', () => {
		expect(addDays('2024-02-28', 1)).toBe('2024-02-29');
		expect(addDays('2023-02-28', 1)).toBe('2023-03-01');
		expect(addDays('2023-12-31', 1)).toBe('2024-01-01');
		expect(addDays('2024-03-01', -1)).toBe('2024-02-29');
		// 2026-03-29 is the EU change to summer time: a day is still a day
		expect(addDays('2026-03-28', 2)).toBe('2026-03-30');
		expect(() => addDays('2023-02-30', 1)).toThrow(RangeError);
	});

	it('keeps years 0000-0099 as written (a Date built from parts would read them as 1900-1999)', () => {
		// 50 is not a leap year (not divisible by 4); 48 is
		expect(addDays('0050-01-01', 1)).toBe('0050-01-02');
		expect(addDays('0050-02-28', 1)).toBe('0050-03-01');
		expect(addDays('0048-02-28', 1)).toBe('0048-02-29');
		expect(addDays('0099-12-31', 1)).toBe('0100-01-01');
	});

	it('finds the Monday and the ISO week of a date', () => {
		// 2021-01-03 is a Sunday; 2020-12-31 was a Thursday, so that week is week 53 of 2020
		expect(mondayOf('2021-01-03')).toBe('2020-12-28');
		expect(isoWeek('2021-01-03')).toBe('2020-W53');
		// 2021-01-04 is a Monday and the week of the year's first Thursday (7 January)
		expect(mondayOf('2021-01-04')).toBe('2021-01-04');
		expect(isoWeek('2021-01-04')).toBe('2021-W01');
		// 2024-12-30 is a Monday; 2025-01-02 is that week's Thursday, so it is week 1 of 2025
		expect(isoWeek('2024-12-31')).toBe('2025-W01');
	});

	it('reads the UTC day of an instant and a DATE column as text', () => {
		expect(utcDay(new Date(Date.UTC(2026, 11, 1, 23, 59, 59)))).toBe('2026-12-01');
		expect(utcDay('2026-12-02')).toBe('2026-12-02');
	});
});

/**
 * The New protocol form's schema (src/lib/validation/protocol.ts). An empty education field must stay
 * "not recorded": read as 0 it would choose the norms of an examinee with no schooling (a regression
 * found in a walk-through, where an empty field was saved as 0 years).
 */
import { describe, expect, it } from 'vitest';
import { newProtocolSchema } from '../../src/lib/validation/protocol';

const base = { code: 'HV-1', batteryId: '1', testDate: '2026-11-30', firstScorerId: '2', secondScorerId: '3', reviewerId: '4' };
const education = (v: unknown) => newProtocolSchema.safeParse({ ...base, educationYears: v });

describe('New protocol: years of education', () => {
	it('empty or blank is not recorded (empty string), never 0', () => {
		for (const v of ['', '   ', undefined]) {
			const r = education(v);
			expect(r.success).toBe(true);
			expect(r.data?.educationYears === '' || r.data?.educationYears === undefined).toBe(true);
		}
	});

	it('a whole number is taken as written, 0 included', () => {
		expect(education('12').data?.educationYears).toBe(12);
		expect(education(' 16 ').data?.educationYears).toBe(16);
		expect(education('0').data?.educationYears).toBe(0);
	});

	it('a fraction, a negative, more than 30 or a word is refused with a message naming the field', () => {
		const message = (v: unknown) => (education(v).error?.issues ?? []).map((i) => i.message).join(' | ');
		expect(message('12.5')).toContain('whole number');
		expect(message('-1')).toContain('Years of education: at least 0');
		expect(message('31')).toContain('Years of education: at most 30');
		expect(message('twelve')).toContain('whole number');
	});
});

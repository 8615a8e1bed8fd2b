import { z } from 'zod';
import { isoDateField as isoDate, optionalIsoDateField } from '../dates';

const id = (what: string) =>
	z.coerce
		.number({ message: `Choose ${what}` })
		.int()
		.positive(`Choose ${what}`);

export const newProtocolSchema = z.object({
	code: z
		.string()
		.trim()
		.min(2, 'Enter the pseudonymous examinee code')
		.max(40)
		.regex(/^[A-Za-z0-9][A-Za-z0-9._-]*$/, 'Letters, digits, dot, dash and underscore only — no names'),
	birthDate: optionalIsoDateField.optional(),
	sex: z.enum(['F', 'M', 'X', '']).optional(),
	// empty means "not recorded" and must stay so: z.coerce.number() would turn '' (and '  ') into 0,
	// which picks the norms of an examinee with no schooling
	educationYears: z
		.union([z.string(), z.number()])
		.optional()
		.transform((v, ctx): number | '' => {
			const s = String(v ?? '').trim();
			if (s === '') return '';
			const problem = !/^-?\d+$/.test(s)
				? 'Enter the years of education as a whole number'
				: Number(s) < 0
					? 'Years of education: at least 0'
					: Number(s) > 30
						? 'Years of education: at most 30'
						: null;
			if (problem) {
				ctx.addIssue({ code: 'custom', message: problem });
				return z.NEVER;
			}
			return Number(s);
		}),
	name: z.string().trim().max(160).optional(),
	batteryId: id('a battery'),
	normSetId: z.union([z.coerce.number().int().positive(), z.literal('')]).optional(),
	testDate: isoDate,
	firstScorerId: id('the first scorer'),
	secondScorerId: id('the second scorer'),
	reviewerId: id('the reviewer')
});

/**
 * Per-test norm-group overrides from the New protocol form: `override.<test>` (the group code) and
 * `reason.<test>`. Empty choices are left out; the service checks the group and the reason.
 */
export function overridesFrom(values: Record<string, unknown>): Record<string, { groupCode: string; reason: string }> {
	const out: Record<string, { groupCode: string; reason: string }> = {};
	for (const [key, v] of Object.entries(values)) {
		const m = /^override\.([a-z0-9][a-z0-9._-]{0,39})$/.exec(key);
		if (!m || typeof v !== 'string' || v.trim() === '') continue;
		const reason = values[`reason.${m[1]}`];
		out[m[1]] = { groupCode: v.trim().slice(0, 40), reason: typeof reason === 'string' ? reason.slice(0, 500) : '' };
	}
	return out;
}

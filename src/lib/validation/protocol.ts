import { z } from 'zod';

const isoDate = z.string().regex(/^\d{4}-\d{2}-\d{2}$/, 'Use the form YYYY-MM-DD').refine((s) => !Number.isNaN(Date.parse(s)), 'Not a calendar date');
const id = (what: string) => z.coerce.number({ message: `Choose ${what}` }).int().positive(`Choose ${what}`);

export const newProtocolSchema = z.object({
	code: z.string().trim().min(2, 'Enter the pseudonymous examinee code').max(40).regex(/^[A-Za-z0-9][A-Za-z0-9._-]*$/, 'Letters, digits, dot, dash and underscore only — no names'),
	birthDate: z.union([isoDate, z.literal('')]).optional(),
	sex: z.enum(['F', 'M', 'X', '']).optional(),
	educationYears: z.union([z.coerce.number().int().min(0, 'At least 0').max(30, 'At most 30'), z.literal('')]).optional(),
	name: z.string().trim().max(160).optional(),
	batteryId: id('a battery'),
	normSetId: z.union([z.coerce.number().int().positive(), z.literal('')]).optional(),
	testDate: isoDate,
	firstScorerId: id('the first scorer'),
	secondScorerId: id('the second scorer'),
	reviewerId: id('the reviewer')
});

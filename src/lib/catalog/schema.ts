/**
 * The catalog's shapes and their validation (zod), shared by the forms (server and browser), the
 * JSON API and the CSV import. Framework-free: runs in the browser, the server and tsx scripts.
 */
import { z } from 'zod';

export const DERIVED = ['z', 'standard', 'scaled', 't', 'percentile'] as const;
export type Derived = (typeof DERIVED)[number];
export const DERIVED_LABELS: Record<Derived, string> = {
	z: 'z',
	standard: 'Standard',
	scaled: 'Scaled',
	t: 'T',
	percentile: 'Percentile'
};
/** Widest values a per-test bound may take on each scale. */
export const SCALE_LIMITS: Record<Derived, [number, number]> = {
	z: [-10, 10],
	standard: [0, 200],
	scaled: [0, 30],
	t: [0, 100],
	percentile: [0, 100]
};
export const DIRECTIONS = ['higher_better', 'lower_better'] as const;
export type Direction = (typeof DIRECTIONS)[number];
export const DIRECTION_LABELS: Record<Direction, string> = { higher_better: 'Higher is better', lower_better: 'Lower is better' };

export const CODE_RE = /^[a-z0-9][a-z0-9-]{0,39}$/;
export const codeField = z
	.string()
	.trim()
	.regex(CODE_RE, 'Use 1–40 lower-case letters, digits and hyphens, starting with a letter or digit');

const RAW_LIMIT = 99_999_999; // DECIMAL(12,4)

export type Bounds = Partial<Record<Derived, [number, number]>>;

/** A test as the API, the services and the CSV import hold it. */
export const testInputSchema = z
	.object({
		code: codeField,
		name: z.string().trim().min(2, 'Enter the test’s name').max(120, 'At most 120 characters'),
		domain: codeField,
		unit: z.string().trim().min(1, 'Enter a unit (points, seconds, errors…)').max(40, 'At most 40 characters'),
		direction: z.enum(DIRECTIONS, { message: 'Choose higher_better or lower_better' }),
		raw: z.object({
			min: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT),
			max: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT),
			decimals: z.number({ message: 'Enter 0–4' }).int('Enter a whole number 0–4').min(0, 'Enter 0–4').max(4, 'Enter 0–4')
		}),
		reported: z.array(z.enum(DERIVED)).min(1, 'Choose at least one derived score').max(5),
		bounds: z.partialRecord(z.enum(DERIVED), z.tuple([z.number().finite(), z.number().finite()])).nullable().default(null),
		reliability: z.number({ message: 'Enter a number between 0 and 1' }).gt(0, 'Above 0').lt(1, 'Below 1').nullable().default(null),
		notes: z.string().trim().max(2000, 'At most 2000 characters').nullable().default(null)
	})
	.superRefine((t, ctx) => {
		if (t.raw.min >= t.raw.max) ctx.addIssue({ code: 'custom', path: ['raw', 'max'], message: 'The maximum must be above the minimum' });
		for (const [f, b] of Object.entries(t.bounds ?? {}) as [Derived, [number, number]][]) {
			const [lo, hi] = SCALE_LIMITS[f];
			if (b[0] >= b[1]) ctx.addIssue({ code: 'custom', path: ['bounds', f], message: `${DERIVED_LABELS[f]} bounds: the lower must be below the upper` });
			else if (b[0] < lo || b[1] > hi) ctx.addIssue({ code: 'custom', path: ['bounds', f], message: `${DERIVED_LABELS[f]} bounds must lie within ${lo}–${hi}` });
		}
	});
export type TestInput = z.output<typeof testInputSchema>;

/** Reported fields always in scale order. */
export function canonicalReported(fields: readonly string[]): Derived[] {
	return DERIVED.filter((f) => fields.includes(f));
}

// ---------------------------------------------------------------------------------------------
// The test form: flat fields (plain HTML form posting), converted to TestInput.

const optNumber = (msg = 'Enter a number') => z.number({ message: msg }).nullable().default(null);

export const testFormSchema = z
	.object({
		code: codeField,
		name: z.string().trim().min(2, 'Enter the test’s name').max(120, 'At most 120 characters'),
		domain: z.string().min(1, 'Choose a domain'),
		unit: z.string().trim().min(1, 'Enter a unit (points, seconds, errors…)').max(40),
		direction: z.enum(DIRECTIONS, { message: 'Choose a direction' }).default('higher_better'),
		raw_min: z.number({ message: 'Enter a number' }).finite().default(0),
		raw_max: z.number({ message: 'Enter a number' }).finite().default(100),
		raw_decimals: z.number({ message: 'Enter 0–4' }).int('Enter a whole number').min(0, 'Enter 0–4').max(4, 'Enter 0–4').default(0),
		reported: z.array(z.enum(DERIVED)).min(1, 'Choose at least one derived score').default(['standard', 'percentile']),
		z_min: optNumber(),
		z_max: optNumber(),
		standard_min: optNumber(),
		standard_max: optNumber(),
		scaled_min: optNumber(),
		scaled_max: optNumber(),
		t_min: optNumber(),
		t_max: optNumber(),
		percentile_min: optNumber(),
		percentile_max: optNumber(),
		reliability: z.number({ message: 'Enter a number between 0 and 1' }).gt(0, 'Above 0').lt(1, 'Below 1').nullable().default(null),
		notes: z.string().max(2000, 'At most 2000 characters').default('')
	})
	.superRefine((f, ctx) => {
		if (f.raw_min >= f.raw_max) ctx.addIssue({ code: 'custom', path: ['raw_max'], message: 'The maximum must be above the minimum' });
		for (const d of DERIVED) {
			const lo = f[`${d}_min`];
			const hi = f[`${d}_max`];
			if ((lo === null) !== (hi === null)) ctx.addIssue({ code: 'custom', path: [`${d}_${lo === null ? 'min' : 'max'}`], message: 'Give both bounds or neither' });
			else if (lo !== null && hi !== null) {
				const [a, b] = SCALE_LIMITS[d];
				if (lo >= hi) ctx.addIssue({ code: 'custom', path: [`${d}_max`], message: 'Must be above the lower bound' });
				else if (lo < a || hi > b) ctx.addIssue({ code: 'custom', path: [`${d}_min`], message: `Within ${a}–${b}` });
			}
		}
	});
export type TestForm = z.output<typeof testFormSchema>;

export function formToTestInput(f: TestForm): TestInput {
	const bounds: Bounds = {};
	for (const d of DERIVED) {
		const lo = f[`${d}_min`];
		const hi = f[`${d}_max`];
		if (lo !== null && hi !== null) bounds[d] = [lo, hi];
	}
	return {
		code: f.code,
		name: f.name,
		domain: f.domain,
		unit: f.unit,
		direction: f.direction,
		raw: { min: f.raw_min, max: f.raw_max, decimals: f.raw_decimals },
		reported: canonicalReported(f.reported),
		bounds: Object.keys(bounds).length ? bounds : null,
		reliability: f.reliability,
		notes: f.notes.trim() || null
	};
}

export function testInputToForm(t: TestInput): TestForm {
	const b = t.bounds ?? {};
	return {
		code: t.code,
		name: t.name,
		domain: t.domain,
		unit: t.unit,
		direction: t.direction,
		raw_min: t.raw.min,
		raw_max: t.raw.max,
		raw_decimals: t.raw.decimals,
		reported: [...t.reported],
		z_min: b.z?.[0] ?? null,
		z_max: b.z?.[1] ?? null,
		standard_min: b.standard?.[0] ?? null,
		standard_max: b.standard?.[1] ?? null,
		scaled_min: b.scaled?.[0] ?? null,
		scaled_max: b.scaled?.[1] ?? null,
		t_min: b.t?.[0] ?? null,
		t_max: b.t?.[1] ?? null,
		percentile_min: b.percentile?.[0] ?? null,
		percentile_max: b.percentile?.[1] ?? null,
		reliability: t.reliability,
		notes: t.notes ?? ''
	};
}

// ---------------------------------------------------------------------------------------------
// Domains, batteries, norm sets, norm groups

export const domainSchema = z.object({
	code: codeField,
	name: z.string().trim().min(2, 'Enter the domain’s name').max(80, 'At most 80 characters')
});

export const batterySchema = z.object({
	code: codeField,
	name: z.string().trim().min(2, 'Enter the battery’s name').max(160, 'At most 160 characters'),
	description: z.string().trim().max(2000).default(''),
	norm_set_id: z.number().int().positive().nullable().default(null),
	tests: z.array(codeField).min(1, 'Choose at least one test').max(100, 'At most 100 tests')
		.refine((a) => new Set(a).size === a.length, 'A test appears twice')
});
export type BatteryInput = z.output<typeof batterySchema>;

export const AGE_BORROW = ['30', 'actual'] as const;
export const AGE_ROUNDING = ['truncate', 'round_days'] as const;

export const normSetSchema = z.object({
	code: codeField,
	name: z.string().trim().min(2, 'Enter the norm set’s name').max(160, 'At most 160 characters'),
	source: z.string().trim().min(3, 'Cite the published source (or say it is invented)').max(4000),
	version: z.string().trim().min(1, 'Enter a version').max(40, 'At most 40 characters').regex(/^[A-Za-z0-9._-]+$/, 'Letters, digits, dot, hyphen, underscore'),
	borrow_days: z.enum(AGE_BORROW, { message: 'Choose 30 or actual' }).default('30'),
	rounding: z.enum(AGE_ROUNDING, { message: 'Choose truncate or round_days' }).default('truncate')
});
export type NormSetInput = z.output<typeof normSetSchema>;

/**
 * A partial change of a norm set (the API's PUT): only the fields sent. No defaults here — with
 * `normSetSchema.partial()` the age rule's defaults filled themselves in, so a PUT of groups alone
 * reset the norm set's age rule to 30-day borrowing and truncation.
 */
export const normSetPatchSchema = z.object({
	code: normSetSchema.shape.code.optional(),
	name: normSetSchema.shape.name.optional(),
	source: normSetSchema.shape.source.optional(),
	version: normSetSchema.shape.version.optional(),
	borrow_days: z.enum(AGE_BORROW, { message: 'Choose 30 or actual' }).optional(),
	rounding: z.enum(AGE_ROUNDING, { message: 'Choose truncate or round_days' }).optional()
});

/** The age rule as stored (the shape of `AgeRule` in src/lib/scoring/age.ts). */
export function ageRuleOf(n: Pick<NormSetInput, 'borrow_days' | 'rounding'>): { borrowDays: 30 | 'actual'; rounding: 'truncate' | 'round_days' } {
	return { borrowDays: n.borrow_days === 'actual' ? 'actual' : 30, rounding: n.rounding };
}

export const SEXES = ['F', 'M'] as const;
export const MAX_AGE_MONTHS = 1500;

export const normGroupSchema = z
	.object({
		test_code: codeField,
		group_code: z.string().trim().regex(/^[A-Za-z0-9][A-Za-z0-9._-]{0,39}$/, 'Use 1–40 letters, digits, dot, hyphen, underscore'),
		age_min_months: z.number({ message: 'Enter whole months' }).int('Whole months').min(0).max(MAX_AGE_MONTHS),
		age_max_months: z.number({ message: 'Enter whole months' }).int('Whole months').min(0).max(MAX_AGE_MONTHS),
		sex: z.enum(SEXES).nullable().default(null),
		edu_min: z.number().int().min(0).max(40).nullable().default(null),
		edu_max: z.number().int().min(0).max(40).nullable().default(null),
		mean: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT),
		sd: z.number({ message: 'Enter a number' }).finite().gt(0, 'SD must be above 0').max(RAW_LIMIT),
		n: z.number().int().min(1).max(10_000_000).nullable().default(null)
	})
	.superRefine((g, ctx) => {
		if (g.age_min_months > g.age_max_months) ctx.addIssue({ code: 'custom', path: ['age_max_months'], message: 'Age range reversed: the upper age is below the lower' });
		if ((g.edu_min === null) !== (g.edu_max === null)) ctx.addIssue({ code: 'custom', path: ['edu_max'], message: 'Give both education bounds or neither' });
		else if (g.edu_min !== null && g.edu_max !== null && g.edu_min > g.edu_max) ctx.addIssue({ code: 'custom', path: ['edu_max'], message: 'Education range reversed' });
	});
export type NormGroupInput = z.output<typeof normGroupSchema>;

/** Field messages from a zod error, keyed by the dotted path. */
export function issuesByPath(error: z.ZodError): Record<string, string> {
	const out: Record<string, string> = {};
	for (const i of error.issues) {
		const key = i.path.length ? i.path.map(String).join('.') : 'form';
		out[key] ??= i.message;
	}
	return out;
}

// ---------------------------------------------------------------------------------------------
// CSV import requests (the JSON API)

export const importPreviewSchema = z.object({
	kind: z.enum(['norms', 'tests'], { message: 'Choose norms or tests' }),
	csv: z.string({ message: 'Send the CSV text as a string' })
});

export const importConfirmSchema = z.discriminatedUnion('kind', [
	z.object({ kind: z.literal('tests'), csv: z.string({ message: 'Send the CSV text as a string' }) }),
	z.object({
		kind: z.literal('norms'),
		csv: z.string({ message: 'Send the CSV text as a string' }),
		target: z.discriminatedUnion('mode', [
			z.object({ mode: z.literal('new'), set: normSetSchema }),
			z.object({ mode: z.literal('existing'), id: z.number().int().positive() })
		])
	})
], { message: 'kind must be norms or tests' });
export type ImportConfirm = z.output<typeof importConfirmSchema>;

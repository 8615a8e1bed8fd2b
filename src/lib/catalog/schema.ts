/**
 * The catalog's shapes and their validation (zod), shared by the forms (server and browser), the
 * JSON API and the CSV import. Framework-free: runs in the browser, the server and tsx scripts.
 */
import { z } from 'zod';
import { NORM_FORMS, TABLE_SCALES, COVARIATE_AGE } from './norm-forms';

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
export const codeField = z.string().trim().regex(CODE_RE, 'Use 1–40 lower-case letters, digits and hyphens, starting with a letter or digit');

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
		bounds: z
			.partialRecord(z.enum(DERIVED), z.tuple([z.number().finite(), z.number().finite()]))
			.nullable()
			.default(null),
		reliability: z.number({ message: 'Enter a number between 0 and 1' }).gt(0, 'Above 0').lt(1, 'Below 1').nullable().default(null),
		notes: z.string().trim().max(2000, 'At most 2000 characters').nullable().default(null)
	})
	.superRefine((t, ctx) => {
		if (t.raw.min >= t.raw.max) ctx.addIssue({ code: 'custom', path: ['raw', 'max'], message: 'The maximum must be above the minimum' });
		for (const [f, b] of Object.entries(t.bounds ?? {}) as [Derived, [number, number]][]) {
			const [lo, hi] = SCALE_LIMITS[f];
			if (b[0] >= b[1]) ctx.addIssue({ code: 'custom', path: ['bounds', f], message: `${DERIVED_LABELS[f]} bounds: the lower must be below the upper` });
			else if (b[0] < lo || b[1] > hi)
				ctx.addIssue({ code: 'custom', path: ['bounds', f], message: `${DERIVED_LABELS[f]} bounds must lie within ${lo}–${hi}` });
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
			if ((lo === null) !== (hi === null))
				ctx.addIssue({ code: 'custom', path: [`${d}_${lo === null ? 'min' : 'max'}`], message: 'Give both bounds or neither' });
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

export const COMPOSITE_FIELDS = ['sum', 'z', 'standard', 'scaled', 't', 'percentile'] as const;
export type CompositeField = (typeof COMPOSITE_FIELDS)[number];

export const compositeSchema = z
	.object({
		code: codeField,
		name: z.string().trim().min(2, 'Enter the composite’s name').max(120, 'At most 120 characters'),
		parts: z
			.array(codeField)
			.min(1, 'Choose at least one part')
			.max(30)
			.refine((a) => new Set(a).size === a.length, 'A part appears twice'),
		part_field: z.enum(['scaled', 'standard', 't'], { message: 'Choose scaled, standard or t' }),
		reported: z
			.array(z.enum(COMPOSITE_FIELDS))
			.min(1, 'Choose at least one reported field')
			.refine((a) => new Set(a).size === a.length, 'A field appears twice'),
		reliability: z.number({ message: 'Enter a number between 0 and 1' }).gt(0, 'Above 0').lt(1, 'Below 1').nullable().default(null)
	})
	.transform((c) => ({ ...c, reported: COMPOSITE_FIELDS.filter((f) => c.reported.includes(f)) }));
export type CompositeInput = z.output<typeof compositeSchema>;

export const batterySchema = z.object({
	code: codeField,
	name: z.string().trim().min(2, 'Enter the battery’s name').max(160, 'At most 160 characters'),
	description: z.string().trim().max(2000).default(''),
	norm_set_id: z.number().int().positive().nullable().default(null),
	tests: z
		.array(codeField)
		.min(1, 'Choose at least one test')
		.max(100, 'At most 100 tests')
		.refine((a) => new Set(a).size === a.length, 'A test appears twice'),
	/** Absent: the battery's composites stay as they are; an array replaces them. */
	composites: z.array(compositeSchema).max(20, 'At most 20 composites').optional()
});
export type BatteryInput = z.output<typeof batterySchema>;

export const AGE_BORROW = ['30', 'actual'] as const;
export const AGE_ROUNDING = ['truncate', 'round_days'] as const;

export const normSetSchema = z.object({
	code: codeField,
	name: z.string().trim().min(2, 'Enter the norm set’s name').max(160, 'At most 160 characters'),
	source: z.string().trim().min(3, 'Cite the published source (or say it is invented)').max(4000),
	version: z
		.string()
		.trim()
		.min(1, 'Enter a version')
		.max(40, 'At most 40 characters')
		.regex(/^[A-Za-z0-9._-]+$/, 'Letters, digits, dot, hyphen, underscore'),
	borrow_days: z.enum(AGE_BORROW, { message: 'Choose 30 or actual' }).default('30'),
	rounding: z.enum(AGE_ROUNDING, { message: 'Choose truncate or round_days' }).default('truncate'),
	/** How age enters regression norms. */
	covariate_age: z.enum(COVARIATE_AGE, { message: 'Choose whole_years or decimal_years' }).default('whole_years')
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
	rounding: z.enum(AGE_ROUNDING, { message: 'Choose truncate or round_days' }).optional(),
	covariate_age: z.enum(COVARIATE_AGE, { message: 'Choose whole_years or decimal_years' }).optional()
});

/** The age rule as stored (the shape of `AgeRule` in src/lib/scoring/age.ts). */
export function ageRuleOf(n: Pick<NormSetInput, 'borrow_days' | 'rounding'>): { borrowDays: 30 | 'actual'; rounding: 'truncate' | 'round_days' } {
	return { borrowDays: n.borrow_days === 'actual' ? 'actual' : 30, rounding: n.rounding };
}

export const SEXES = ['F', 'M'] as const;
export const MAX_AGE_MONTHS = 1500;

const tableRowSchema = z.object({
	lo: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT),
	hi: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT),
	score: z.number({ message: 'Enter a whole number' }).int('Enter a whole number').min(-1000).max(1000).nullable().default(null),
	percentile: z
		.string()
		.trim()
		.max(12)
		.nullable()
		.default(null)
		.transform((v) => (v === '' ? null : v))
});

const coefficientsSchema = z.strictObject(
	{ age: z.number().finite().optional(), education: z.number().finite().optional(), sex: z.number().finite().optional() },
	{ error: 'Coefficients may name only age, education and sex' }
);

export const normGroupSchema = z
	.object({
		test_code: codeField,
		/** `composite`: the norm of a battery's composite (test_code holds the composite's code). */
		subject: z.enum(['test', 'composite']).default('test'),
		group_code: z
			.string()
			.trim()
			.regex(/^[A-Za-z0-9][A-Za-z0-9._-]{0,39}$/, 'Use 1–40 letters, digits, dot, hyphen, underscore'),
		age_min_months: z.number({ message: 'Enter whole months' }).int('Whole months').min(0).max(MAX_AGE_MONTHS),
		age_max_months: z.number({ message: 'Enter whole months' }).int('Whole months').min(0).max(MAX_AGE_MONTHS),
		sex: z.enum(SEXES).nullable().default(null),
		edu_min: z.number().int().min(0).max(40).nullable().default(null),
		edu_max: z.number().int().min(0).max(40).nullable().default(null),
		form: z.enum(NORM_FORMS, { message: 'Choose mean_sd, table or regression' }).default('mean_sd'),
		mean: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT).nullable().default(null),
		/** The SD (mean/SD) or the residual SD (regression). */
		sd: z.number({ message: 'Enter a number' }).finite().gt(0, 'SD must be above 0').max(RAW_LIMIT).nullable().default(null),
		n: z.number().int().min(1).max(10_000_000).nullable().default(null),
		scale: z.enum(TABLE_SCALES, { message: 'Choose scaled, standard, t or percentile' }).nullable().default(null),
		rows: z.array(tableRowSchema).max(2000, 'At most 2000 rows').nullable().default(null),
		intercept: z.number({ message: 'Enter a number' }).finite().min(-RAW_LIMIT).max(RAW_LIMIT).nullable().default(null),
		coefficients: coefficientsSchema.nullable().default(null)
	})
	.superRefine((g, ctx) => {
		if (g.age_min_months > g.age_max_months)
			ctx.addIssue({ code: 'custom', path: ['age_max_months'], message: 'Age range reversed: the upper age is below the lower' });
		if ((g.edu_min === null) !== (g.edu_max === null)) ctx.addIssue({ code: 'custom', path: ['edu_max'], message: 'Give both education bounds or neither' });
		else if (g.edu_min !== null && g.edu_max !== null && g.edu_min > g.edu_max)
			ctx.addIssue({ code: 'custom', path: ['edu_max'], message: 'Education range reversed' });
		if (g.form === 'mean_sd') {
			if (g.mean === null) ctx.addIssue({ code: 'custom', path: ['mean'], message: 'Enter the mean' });
			if (g.sd === null) ctx.addIssue({ code: 'custom', path: ['sd'], message: 'Enter the SD' });
		} else if (g.form === 'regression') {
			if (g.subject === 'composite') ctx.addIssue({ code: 'custom', path: ['form'], message: 'A composite is normed by mean/SD of its sum or by a sum table' });
			if (g.intercept === null) ctx.addIssue({ code: 'custom', path: ['intercept'], message: 'Enter the intercept' });
			if (g.sd === null) ctx.addIssue({ code: 'custom', path: ['sd'], message: 'Enter the residual SD' });
			if (!g.coefficients || Object.keys(g.coefficients).length === 0)
				ctx.addIssue({ code: 'custom', path: ['coefficients'], message: 'Give at least one coefficient (age, education or sex)' });
		} else {
			if (g.scale === null) ctx.addIssue({ code: 'custom', path: ['scale'], message: 'Choose the scale the table gives' });
			if (!g.rows || g.rows.length === 0) ctx.addIssue({ code: 'custom', path: ['rows'], message: 'The table has no rows' });
			if (g.subject === 'composite' && g.scale === 'percentile')
				ctx.addIssue({ code: 'custom', path: ['scale'], message: 'A composite table gives a score, not percentiles only' });
		}
	});
export type NormGroupInput = z.output<typeof normGroupSchema>;

// ---------------------------------------------------------------------------------------------
// CSV import requests (the JSON API)

export const importPreviewSchema = z.object({
	kind: z.enum(['norms', 'tests', 'tables', 'equations'], { message: 'Choose norms, tests, tables or equations' }),
	csv: z.string({ message: 'Send the CSV text as a string' })
});

export const importConfirmSchema = z.discriminatedUnion(
	'kind',
	[
		z.object({ kind: z.literal('tests'), csv: z.string({ message: 'Send the CSV text as a string' }) }),
		z.object({
			kind: z.enum(['norms', 'tables', 'equations']),
			csv: z.string({ message: 'Send the CSV text as a string' }),
			target: z.discriminatedUnion('mode', [
				z.object({ mode: z.literal('new'), set: normSetSchema }),
				z.object({ mode: z.literal('existing'), id: z.number().int().positive() })
			])
		})
	],
	{ message: 'kind must be norms, tests, tables or equations' }
);
export type ImportConfirm = z.output<typeof importConfirmSchema>;

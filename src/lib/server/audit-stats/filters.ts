/**
 * The Audit screen's filters, parsed from a query string: date range, scorer, battery, test, kind
 * (and, for the agreement reports, the field). Bad values answer 400 with one message per field.
 */
import { z } from 'zod';
import { KINDS } from '../../scoring/kinds';
import { FIELDS, type Field } from '../../scoring/scales';
import { isoDateField as isoDate } from '../../dates';
import { fieldMessages } from '../../validation/issues';
import { addDays } from '../../dates';

export interface AuditFilters {
	/** Inclusive first day, YYYY-MM-DD (UTC). */
	from: string | null;
	/** Inclusive last day, YYYY-MM-DD (UTC). */
	to: string | null;
	scorer: number | null;
	battery: number | null;
	test: string | null;
	kind: string | null;
	/** The field for bland-altman and agreement-scorers (default standard). */
	field: Field;
}

export const FILTER_KEYS = ['from', 'to', 'scorer', 'battery', 'test', 'kind', 'field', 'format'] as const;

const id = (what: string) =>
	z
		.string()
		.regex(/^[1-9]\d{0,9}$/, `Choose a ${what} from the list (a positive whole number).`)
		.transform(Number)
		.refine((n) => n <= 2 ** 31, `Choose a ${what} from the list.`);

const schema = z
	.object({
		from: isoDate.optional(),
		to: isoDate.optional(),
		scorer: id('scorer').optional(),
		battery: id('battery').optional(),
		test: z
			.string()
			.regex(/^[a-z0-9][a-z0-9._-]{0,39}$/, 'Use a test code from the catalog (lower-case letters, digits, - . _).')
			.optional(),
		kind: z.enum(KINDS, { error: `Use one of the kinds: ${KINDS.join(', ')}.` }).optional(),
		field: z.enum(FIELDS as unknown as [Field, ...Field[]], { error: `Use one of the fields: ${FIELDS.join(', ')}.` }).optional(),
		format: z.enum(['json', 'csv'], { error: 'Use format=json or format=csv.' }).optional()
	})
	.refine((f) => !f.from || !f.to || f.from <= f.to, { path: ['to'], message: 'The end date is before the start date.' });

export type FilterResult = { ok: true; filters: AuditFilters; format: 'json' | 'csv' } | { ok: false; errors: Record<string, string> };

/** Parse the query string. Empty values count as absent; repeated or unknown keys are errors. */
export function parseFilters(params: URLSearchParams): FilterResult {
	const errors: Record<string, string> = {};
	const raw: Record<string, string> = {};
	for (const key of new Set(params.keys())) {
		const values = params.getAll(key);
		if (!(FILTER_KEYS as readonly string[]).includes(key)) {
			errors[key] = `Unknown filter. Use ${FILTER_KEYS.join(', ')}.`;
			continue;
		}
		if (values.length > 1) {
			errors[key] = 'Give this filter once.';
			continue;
		}
		if (values[0].trim() !== '') raw[key] = values[0].trim();
	}
	const parsed = schema.safeParse(raw);
	if (!parsed.success) for (const [key, message] of Object.entries(fieldMessages(parsed.error))) errors[key === 'form' ? 'query' : key] ??= message;
	if (Object.keys(errors).length > 0 || !parsed.success) return { ok: false, errors };
	const f = parsed.data;
	return {
		ok: true,
		format: f.format ?? 'json',
		filters: {
			from: f.from ?? null,
			to: f.to ?? null,
			scorer: f.scorer ?? null,
			battery: f.battery ?? null,
			test: f.test ?? null,
			kind: f.kind ?? null,
			field: f.field ?? 'standard'
		}
	};
}

export const NO_FILTERS: AuditFilters = { from: null, to: null, scorer: null, battery: null, test: null, kind: null, field: 'standard' };

/** The day after an ISO date (exclusive upper bound of a range). */
export function dayAfter(iso: string): string {
	return addDays(iso, 1);
}

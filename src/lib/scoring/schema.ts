/**
 * zod 4 schema of the batch input (one protocol document), with cross-checks, and error messages
 * that name the path of the bad value: `passes[1].scores.speeded-match.raw: expected number or string`.
 */
import { z } from 'zod';
import type { ReconcileInput } from './reconcile';

const NUMERAL = /^\s*[+\-\u2212]?(?:\d+\.?\d*|\.\d+)\s*$/;

const finite = (what = 'expected number') => z.number({ error: what }).refine(Number.isFinite, { error: what });

const value = z.union([z.number(), z.string(), z.null()], { error: 'expected number or string' });

const derivedField = z.enum(['z', 'standard', 'scaled', 't', 'percentile'], {
	error: 'expected one of z, standard, scaled, t, percentile'
});

const bound = z
	.tuple([finite(), finite()], { error: 'expected [low, high]' })
	.refine(([lo, hi]) => lo < hi, { error: 'low must be below high' });

const testSchema = z.strictObject({
	id: z.string({ error: 'expected string' }).min(1, { error: 'must not be empty' }),
	direction: z.enum(['higher_better', 'lower_better'], { error: 'expected "higher_better" or "lower_better"' }),
	raw: z
		.strictObject({
			min: finite(),
			max: finite(),
			decimals: z.number({ error: 'expected number' }).int({ error: 'expected a whole number' }).min(0, { error: 'must be 0 or more' }).max(6, { error: 'must be at most 6' })
		}, { error: 'expected object' })
		.refine((r) => r.min <= r.max, { error: 'min must not be above max', path: ['max'] }),
	reported: z
		.array(derivedField, { error: 'expected array' })
		.refine((a) => new Set(a).size === a.length, { error: 'lists a field twice' }),
	bounds: z
		.strictObject({ z: bound, standard: bound, scaled: bound, t: bound, percentile: bound }, { error: 'expected object' })
		.partial()
		.nullish()
}, { error: 'expected object' });

const normSchema = z.strictObject({
	test: z.string({ error: 'expected string' }),
	group: z.string({ error: 'expected string' }),
	mean: finite(),
	sd: finite().refine((x) => x > 0, { error: 'must be above 0' })
}, { error: 'expected object' });

const fieldValues = z.strictObject(
	{ raw: value, z: value, standard: value, scaled: value, t: value, percentile: value },
	{ error: 'expected object' }
).partial();

const passSchema = z.strictObject({
	scorer: z.string({ error: 'expected string' }),
	scores: z.record(z.string(), fieldValues, { error: 'expected object' })
}, { error: 'expected object' });

export const reconcileInputSchema = z
	.strictObject({
		tests: z.array(testSchema, { error: 'expected array' }),
		norms: z.array(normSchema, { error: 'expected array' }),
		protocol: z.strictObject({
			group: z.string({ error: 'expected string' }),
			groups: z.record(z.string(), z.string({ error: 'expected string' }), { error: 'expected object' }).nullish()
		}, { error: 'expected object' }),
		passes: z.array(passSchema, { error: 'expected array' }).length(2, { error: 'expected exactly two passes' })
	}, { error: 'expected object' })
	.superRefine((doc, ctx) => {
		const ids = new Map<string, number>();
		doc.tests.forEach((t, i) => {
			if (ids.has(t.id)) ctx.addIssue({ code: 'custom', path: ['tests', i, 'id'], message: `duplicate test id ${JSON.stringify(t.id)}` });
			else ids.set(t.id, i);
		});
		const seen = new Set<string>();
		doc.norms.forEach((n, i) => {
			if (!ids.has(n.test)) ctx.addIssue({ code: 'custom', path: ['norms', i, 'test'], message: `unknown test ${JSON.stringify(n.test)}` });
			const key = `${n.test}\u0000${n.group}`;
			if (seen.has(key)) ctx.addIssue({ code: 'custom', path: ['norms', i], message: `duplicate norms for test ${JSON.stringify(n.test)} group ${JSON.stringify(n.group)}` });
			seen.add(key);
		});
		for (const t of doc.tests) {
			const own = doc.protocol.groups?.[t.id];
			const g = own ?? doc.protocol.group;
			if (!seen.has(`${t.id}\u0000${g}`)) {
				ctx.addIssue({
					code: 'custom',
					path: own !== undefined ? ['protocol', 'groups', t.id] : ['protocol', 'group'],
					message: `no norms for test ${JSON.stringify(t.id)} in group ${JSON.stringify(g)}`
				});
			}
		}
		for (const k of Object.keys(doc.protocol.groups ?? {})) {
			if (!ids.has(k)) ctx.addIssue({ code: 'custom', path: ['protocol', 'groups', k], message: `unknown test ${JSON.stringify(k)}` });
		}
		doc.passes.forEach((p, pi) => {
			for (const [testId, fields] of Object.entries(p.scores)) {
				if (!ids.has(testId)) {
					ctx.addIssue({ code: 'custom', path: ['passes', pi, 'scores', testId], message: `unknown test ${JSON.stringify(testId)}` });
					continue;
				}
				for (const [f, v] of Object.entries(fields)) {
					if (typeof v !== 'string' || v.trim() === '') continue;
					if (f === 'percentile' && (v.trim() === '<1' || v.trim() === '>99')) continue;
					if (!NUMERAL.test(v)) {
						ctx.addIssue({
							code: 'custom',
							path: ['passes', pi, 'scores', testId, f],
							message: `expected a number written in digits${f === 'percentile' ? ' (or "<1", ">99")' : ''}, got ${JSON.stringify(v)}`
						});
					}
				}
			}
		});
	});

/** Render a zod path as `passes[1].scores.speeded-match.raw`, optionally after a prefix such as `[3]`. */
export function formatPath(path: readonly PropertyKey[], prefix = ''): string {
	let s = prefix;
	for (const k of path) {
		if (typeof k === 'number') s += `[${k}]`;
		else s += s === '' ? String(k) : `.${String(k)}`;
	}
	return s;
}

export type ParseResult = { ok: true; value: ReconcileInput } | { ok: false; errors: string[] };

/**
 * Validate one document. Errors are `path: message` lines (at most `maxErrors`), path prefixed by
 * `prefix` (the batch command passes `[i]` for array elements). An unknown key is named in the path.
 */
export function parseReconcileInput(doc: unknown, prefix = '', maxErrors = 20): ParseResult {
	const r = reconcileInputSchema.safeParse(doc);
	if (r.success) return { ok: true, value: r.data as ReconcileInput };
	const errors: string[] = [];
	for (const issue of r.error.issues) {
		if (issue.code === 'unrecognized_keys') {
			for (const key of issue.keys) errors.push(`${formatPath([...issue.path, key], prefix) || '(top level)'}: unknown field`);
		} else {
			errors.push(`${formatPath(issue.path, prefix) || '(top level)'}: ${issue.message}`);
		}
		if (errors.length >= maxErrors) break;
	}
	return { ok: false, errors };
}

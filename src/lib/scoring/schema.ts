/**
 * zod 4 schema of the batch input (one protocol document), with cross-checks, and error messages
 * that name the path of the bad value: `passes[1].scores.speeded-match.raw: expected number or string`.
 */
import { z } from 'zod';
import type { ReconcileInput } from './reconcile';
import { boundsFor, hasDecimalComma, type BoundsOverride, type DerivedField } from './scales';
import { canonicalBand } from './forms';
import { checkTableRows } from './tables';

const NUMERAL = /^\s*[+\-\u2212]?(?:\d+\.?\d*|\.\d+)\s*$/;

const finite = (what = 'expected number') => z.number({ error: what }).refine(Number.isFinite, { error: what });

const value = z.union([z.number(), z.string(), z.null()], { error: 'expected number or string' });

const derivedField = z.enum(['z', 'standard', 'scaled', 't', 'percentile'], {
	error: 'expected one of z, standard, scaled, t, percentile'
});

const bound = z.tuple([finite(), finite()], { error: 'expected [low, high]' }).refine(([lo, hi]) => lo < hi, { error: 'low must be below high' });

const testSchema = z.strictObject(
	{
		id: z.string({ error: 'expected string' }).min(1, { error: 'must not be empty' }),
		direction: z.enum(['higher_better', 'lower_better'], { error: 'expected "higher_better" or "lower_better"' }),
		raw: z
			.strictObject(
				{
					min: finite(),
					max: finite(),
					decimals: z
						.number({ error: 'expected number' })
						.int({ error: 'expected a whole number' })
						.min(0, { error: 'must be 0 or more' })
						.max(6, { error: 'must be at most 6' })
				},
				{ error: 'expected object' }
			)
			.refine((r) => r.min <= r.max, { error: 'min must not be above max', path: ['max'] }),
		reported: z.array(derivedField, { error: 'expected array' }).refine((a) => new Set(a).size === a.length, { error: 'lists a field twice' }),
		bounds: z.strictObject({ z: bound, standard: bound, scaled: bound, t: bound, percentile: bound }, { error: 'expected object' }).partial().nullish()
	},
	{ error: 'expected object' }
);

const normSchema = z.strictObject(
	{
		test: z.string({ error: 'expected string' }),
		group: z.string({ error: 'expected string' }),
		form: z.literal('mean_sd').optional(),
		mean: finite(),
		sd: finite().refine((x) => x > 0, { error: 'must be above 0' })
	},
	{ error: 'expected object' }
);

const regressionSchema = z.strictObject(
	{
		test: z.string({ error: 'expected string' }),
		group: z.string({ error: 'expected string' }),
		form: z.literal('regression'),
		intercept: finite(),
		coefficients: z.record(z.string(), finite(), { error: 'expected object' }),
		sd: finite().refine((x) => x > 0, { error: 'must be above 0' })
	},
	{ error: 'expected object' }
);

const tableScale = z.enum(['scaled', 'standard', 't', 'percentile'], { error: 'expected one of scaled, standard, t, percentile' });
const range = z.tuple([finite(), finite()], { error: 'expected [low, high]' });
const rowFields = { score: finite().optional(), percentile: z.union([z.number(), z.string()], { error: 'expected number or string' }).optional() };

const tableSchema = z.strictObject(
	{
		test: z.string({ error: 'expected string' }),
		group: z.string({ error: 'expected string' }),
		form: z.literal('table'),
		scale: tableScale,
		rows: z.array(z.strictObject({ raw: range, ...rowFields }, { error: 'expected object' }), { error: 'expected array' })
	},
	{ error: 'expected object' }
);

const compositeNormSchema = z.strictObject(
	{
		composite: z.string({ error: 'expected string' }),
		group: z.string({ error: 'expected string' }),
		form: z.literal('mean_sd').optional(),
		mean: finite(),
		sd: finite().refine((x) => x > 0, { error: 'must be above 0' })
	},
	{ error: 'expected object' }
);

const compositeTableSchema = z.strictObject(
	{
		composite: z.string({ error: 'expected string' }),
		group: z.string({ error: 'expected string' }),
		form: z.literal('table'),
		scale: tableScale,
		rows: z.array(z.strictObject({ sum: range, ...rowFields }, { error: 'expected object' }), { error: 'expected array' })
	},
	{ error: 'expected object' }
);

/** A norm entry: the schema is chosen by `composite`/`test` and `form`; its issues keep their paths. */
const anyNorm = z.any().superRefine((n, ctx) => {
	if (typeof n !== 'object' || n === null || Array.isArray(n)) {
		ctx.addIssue({ code: 'custom', path: [], message: 'expected object' });
		return;
	}
	const isComposite = 'composite' in n;
	const form = (n as { form?: unknown }).form;
	let schema: z.ZodType;
	if (isComposite) {
		if (form === undefined || form === 'mean_sd') schema = compositeNormSchema;
		else if (form === 'table') schema = compositeTableSchema;
		else return void ctx.addIssue({ code: 'custom', path: ['form'], message: 'expected "mean_sd" or "table" for a composite norm' });
	} else if (form === undefined || form === 'mean_sd') schema = normSchema;
	else if (form === 'regression') schema = regressionSchema;
	else if (form === 'table') schema = tableSchema;
	else return void ctx.addIssue({ code: 'custom', path: ['form'], message: 'expected "mean_sd", "regression" or "table"' });
	const r = schema.safeParse(n);
	if (r.success) return;
	for (const issue of r.error.issues) {
		if (issue.code === 'unrecognized_keys') {
			for (const key of issue.keys)
				ctx.addIssue({ code: 'custom', path: [...issue.path, key] as PropertyKey[] as (string | number)[], message: 'unknown field' });
		} else ctx.addIssue({ code: 'custom', path: issue.path as (string | number)[], message: issue.message });
	}
});

const compositeSchema = z.strictObject(
	{
		id: z.string({ error: 'expected string' }).min(1, { error: 'must not be empty' }),
		parts: z
			.array(z.string({ error: 'expected string' }), { error: 'expected array' })
			.min(1, { error: 'needs at least one part' })
			.refine((a) => new Set(a).size === a.length, { error: 'lists a part twice' }),
		part_field: z.enum(['scaled', 'standard', 't'], { error: 'expected one of scaled, standard, t' }),
		reported: z
			.array(z.enum(['sum', 'z', 'standard', 'scaled', 't', 'percentile'], { error: 'expected one of sum, z, standard, scaled, t, percentile' }), {
				error: 'expected array'
			})
			.refine((a) => new Set(a).size === a.length, { error: 'lists a field twice' })
	},
	{ error: 'expected object' }
);

const fieldValues = z
	.strictObject({ raw: value, sum: value, z: value, standard: value, scaled: value, t: value, percentile: value }, { error: 'expected object' })
	.partial();

const passSchema = z.strictObject(
	{
		scorer: z.string({ error: 'expected string' }),
		scores: z.record(z.string(), fieldValues, { error: 'expected object' })
	},
	{ error: 'expected object' }
);

export const reconcileInputSchema = z
	.strictObject(
		{
			tests: z.array(testSchema, { error: 'expected array' }),
			norms: z.array(anyNorm, { error: 'expected array' }),
			composites: z.array(compositeSchema, { error: 'expected array' }).nullish(),
			protocol: z.strictObject(
				{
					group: z.string({ error: 'expected string' }),
					groups: z.record(z.string(), z.string({ error: 'expected string' }), { error: 'expected object' }).nullish(),
					covariates: z.record(z.string(), finite(), { error: 'expected object' }).nullish()
				},
				{ error: 'expected object' }
			),
			passes: z.array(passSchema, { error: 'expected array' }).length(2, { error: 'expected exactly two passes' })
		},
		{ error: 'expected object' }
	)
	.superRefine((doc, ctx) => {
		// zod runs this refinement after non-fatal issues too (unknown keys, refinements) — and after a norm
		// entry's own issues, which are custom ones: the norms' shapes are only known good when none was raised
		const issues = (ctx as unknown as { issues?: { path?: PropertyKey[] }[] }).issues ?? [];
		if (issues.some((i) => i.path?.[0] === 'norms')) return;
		crossCheck(doc as unknown as Doc, ctx);
	});

type Issue = { path: (string | number)[]; message: string };
type Doc = {
	tests: { id: string; reported: DerivedField[]; raw: { min: number; max: number; decimals: number }; bounds?: BoundsOverride | null }[];
	norms: Record<string, unknown>[];
	composites?: { id: string; parts: string[]; part_field: 'scaled' | 'standard' | 't'; reported: string[] }[] | null;
	protocol: { group: string; groups?: Record<string, string> | null; covariates?: Record<string, number> | null };
	passes: { scores: Record<string, Record<string, unknown>> }[];
};

/** Checks across the document: ids, norms per group, tables, covariates, composites, pass values. */
function crossCheck(doc: Doc, ctx: { addIssue: (i: { code: 'custom'; path: (string | number)[]; message: string }) => void }): void {
	const add = (i: Issue) => ctx.addIssue({ code: 'custom', ...i });
	const ids = new Map<string, number>();
	doc.tests.forEach((t, i) => {
		if (ids.has(t.id)) add({ path: ['tests', i, 'id'], message: `duplicate test id ${JSON.stringify(t.id)}` });
		else ids.set(t.id, i);
	});
	const composites = doc.composites ?? [];
	const compIds = new Map<string, number>();
	composites.forEach((c, i) => {
		if (ids.has(c.id) || compIds.has(c.id))
			add({ path: ['composites', i, 'id'], message: `duplicate id ${JSON.stringify(c.id)} (ids are unique across tests and composites)` });
		else compIds.set(c.id, i);
	});
	const seen = new Set<string>();
	const pctOnlyNorm = new Map<string, number>(); // test or composite id → index of a percentile-only table
	doc.norms.forEach((n, i) => {
		const isComp = 'composite' in n;
		const owner = String(isComp ? n.composite : n.test);
		if (isComp ? !compIds.has(owner) : !ids.has(owner)) {
			add({ path: ['norms', i, isComp ? 'composite' : 'test'], message: `unknown ${isComp ? 'composite' : 'test'} ${JSON.stringify(owner)}` });
		}
		const key = `${isComp ? 'c' : 't'}\u0000${owner}\u0000${String(n.group)}`;
		if (seen.has(key))
			add({ path: ['norms', i], message: `duplicate norms for ${isComp ? 'composite' : 'test'} ${JSON.stringify(owner)} group ${JSON.stringify(n.group)}` });
		seen.add(key);
		if (n.form === 'table' && n.scale === 'percentile' && !pctOnlyNorm.has(owner)) pctOnlyNorm.set(owner, i);
		if (n.form === 'regression') {
			for (const k of Object.keys((n.coefficients as Record<string, number>) ?? {})) {
				const x = doc.protocol.covariates?.[k];
				if (x === undefined || x === null)
					add({ path: ['norms', i, 'coefficients', k], message: `covariate ${JSON.stringify(k)} is not in protocol.covariates` });
			}
		}
	});
	// tables: coverage, scores, percentiles, named by row
	doc.norms.forEach((n, i) => {
		if (n.form !== 'table') return;
		const rows = n.rows as Record<string, unknown>[];
		const scale = n.scale as 'scaled' | 'standard' | 't' | 'percentile';
		if ('composite' in n) {
			const c = composites[compIds.get(String(n.composite)) ?? -1];
			if (!c || !c.parts.every((p) => ids.has(p))) return;
			let lo = 0;
			let hi = 0;
			for (const p of c.parts) {
				const [a, b] = boundsFor(c.part_field, doc.tests[ids.get(p) as number].bounds);
				lo += a;
				hi += b;
			}
			const spec = { key: 'sum' as const, min: Math.ceil(lo - 1e-9), max: Math.floor(hi + 1e-9), decimals: 0, scale };
			for (const pr of checkTableRows(rows, spec)) add({ path: ['norms', i, ...pr.path], message: pr.message });
		} else {
			const t = doc.tests[ids.get(String(n.test)) ?? -1];
			// a test whose raw spec is itself bad (reported at tests[i].raw) cannot have its table checked
			if (!t || !Number.isInteger(t.raw.decimals) || t.raw.decimals < 0 || t.raw.decimals > 6 || !(t.raw.min <= t.raw.max)) return;
			const spec = {
				key: 'raw' as const,
				min: t.raw.min,
				max: t.raw.max,
				decimals: t.raw.decimals,
				scale,
				bounds: scale === 'percentile' ? undefined : boundsFor(scale, t.bounds)
			};
			for (const pr of checkTableRows(rows, spec)) add({ path: ['norms', i, ...pr.path], message: pr.message });
		}
	});
	// percentile-only tests report percentile only
	doc.tests.forEach((t, i) => {
		const j = pctOnlyNorm.get(t.id);
		if (j === undefined) return;
		t.reported.forEach((f, k) => {
			if (f !== 'percentile')
				add({
					path: ['tests', i, 'reported', k],
					message: `test ${JSON.stringify(t.id)} has a percentile-only table (norms[${j}]), so it may report percentile only, not ${f}`
				});
		});
	});
	// norms for each test's and composite's group
	for (const t of doc.tests) {
		const own = doc.protocol.groups?.[t.id];
		const g = own ?? doc.protocol.group;
		if (!seen.has(`t\u0000${t.id}\u0000${g}`)) {
			add({
				path: own !== undefined ? ['protocol', 'groups', t.id] : ['protocol', 'group'],
				message: `no norms for test ${JSON.stringify(t.id)} in group ${JSON.stringify(g)}`
			});
		}
	}
	composites.forEach((c, ci) => {
		const own = doc.protocol.groups?.[c.id];
		const g = own ?? doc.protocol.group;
		if (!seen.has(`c\u0000${c.id}\u0000${g}`)) {
			add({
				path: own !== undefined ? ['protocol', 'groups', c.id] : ['protocol', 'group'],
				message: `no norms for composite ${JSON.stringify(c.id)} in group ${JSON.stringify(g)}`
			});
		}
		c.parts.forEach((p, k) => {
			const ti = ids.get(p);
			if (ti === undefined)
				add({ path: ['composites', ci, 'parts', k], message: `unknown test ${JSON.stringify(p)}${compIds.has(p) ? ' (a composite cannot be a part)' : ''}` });
			else if (!doc.tests[ti].reported.includes(c.part_field)) {
				add({ path: ['composites', ci, 'parts', k], message: `test ${JSON.stringify(p)} does not report ${c.part_field}, the composite's part_field` });
			}
		});
		const j = pctOnlyNorm.get(c.id);
		if (j !== undefined) {
			c.reported.forEach((f, k) => {
				if (f !== 'percentile' && f !== 'sum')
					add({
						path: ['composites', ci, 'reported', k],
						message: `composite ${JSON.stringify(c.id)} has a percentile-only table (norms[${j}]), so it may report sum and percentile only, not ${f}`
					});
			});
		}
	});
	for (const k of Object.keys(doc.protocol.groups ?? {})) {
		if (!ids.has(k) && !compIds.has(k)) add({ path: ['protocol', 'groups', k], message: `unknown test or composite ${JSON.stringify(k)}` });
	}
	doc.passes.forEach((p, pi) => {
		for (const [id, fields] of Object.entries(p.scores)) {
			const isTest = ids.has(id);
			if (!isTest && !compIds.has(id)) {
				add({ path: ['passes', pi, 'scores', id], message: `unknown test or composite ${JSON.stringify(id)}` });
				continue;
			}
			const bands = pctOnlyNorm.has(id);
			for (const [f, v] of Object.entries(fields)) {
				if (isTest && f === 'sum') {
					add({ path: ['passes', pi, 'scores', id, f], message: 'a test has no sum (only composites do)' });
					continue;
				}
				if (!isTest && f === 'raw') {
					add({ path: ['passes', pi, 'scores', id, f], message: 'a composite has no raw score' });
					continue;
				}
				if (typeof v !== 'string' || v.trim() === '') continue;
				if (f === 'percentile' && (v.trim() === '<1' || v.trim() === '>99')) continue;
				if (f === 'percentile' && bands && canonicalBand(v) !== null) continue;
				if (!NUMERAL.test(v)) {
					add({
						path: ['passes', pi, 'scores', id, f],
						message: `expected a number written in digits${hasDecimalComma(v) ? ' with a decimal point, not a comma' : ''}${f === 'percentile' ? (bands ? ' (or "<1", ">99", a band such as "10-25", "<=5", ">=75")' : ' (or "<1", ">99")') : ''}, got ${JSON.stringify(v)}`
					});
				}
			}
		}
	});
}

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

/**
 * The input of the `agreement` batch command (and of any form or API that takes the same
 * object), as a zod 4 schema, plus a formatter that turns zod issues into one line per
 * problem naming the path: `icc.ratings[2][1]: expected a number, got null`.
 *
 * Validation is two-stage: the structural schema (types, shapes, unknown keys) first; only
 * when that passes, the cross-field checks (weights need categories, labels must be in
 * categories, ICC rows must all be the same length, at least one key). Pure: no framework or
 * Node imports.
 */
import { z } from 'zod';

export const KAPPA_WEIGHT_NAMES = ['none', 'linear', 'quadratic'] as const;
export const AGREEMENT_KEYS = ['kappa', 'icc', 'bland_altman'] as const;

const label = z.string();
const finite = z.number(); // zod 4 rejects NaN and ±Infinity in z.number()

export const kappaInputSchema = z.strictObject({
	pairs: z.array(z.tuple([label, label], { error: 'expected a pair of two labels ["a", "b"]' })).min(1, { error: 'expected at least 1 pair' }),
	weights: z.enum(KAPPA_WEIGHT_NAMES).optional(),
	categories: z.array(label).min(1, { error: 'expected at least 1 category' }).optional()
});

export const iccInputSchema = z.strictObject({
	ratings: z.array(z.array(finite, { error: 'expected a row: an array of numbers, one per rater' })).min(2, { error: 'expected at least 2 rows (targets)' })
});

export const blandAltmanInputSchema = z.strictObject({
	pairs: z.array(z.tuple([finite, finite], { error: 'expected a pair of two numbers [x, y]' })).min(2, { error: 'expected at least 2 pairs' })
});

/** Types and shapes only. */
export const agreementStructureSchema = z.strictObject({
	kappa: kappaInputSchema.optional(),
	icc: iccInputSchema.optional(),
	bland_altman: blandAltmanInputSchema.optional()
});

export type AgreementInput = z.infer<typeof agreementStructureSchema>;
export type KappaInput = z.infer<typeof kappaInputSchema>;
export type IccInput = z.infer<typeof iccInputSchema>;
export type BlandAltmanInput = z.infer<typeof blandAltmanInputSchema>;

type Issue = { path: (string | number)[]; message: string };

/**
 * The cross-field rules, on input that already has the right structure. Written defensively
 * all the same: zod 4 lets a pipe continue past non-aborting issues such as unknown keys.
 */
export function crossFieldIssues(input: AgreementInput): Issue[] {
	const issues: Issue[] = [];
	if (!AGREEMENT_KEYS.some((key) => input[key] !== undefined)) {
		issues.push({ path: [], message: `expected at least one of ${AGREEMENT_KEYS.join(', ')}` });
	}

	const kappa = input.kappa;
	if (kappa && Array.isArray(kappa.pairs)) {
		const weights = kappa.weights ?? 'none';
		if (kappa.categories === undefined) {
			if (weights !== 'none') {
				issues.push({
					path: ['kappa', 'categories'],
					message: `required with ${weights} weights (the weights need the category order)`
				});
			}
		} else if (Array.isArray(kappa.categories)) {
			const seen = new Set<string>();
			kappa.categories.forEach((c, i) => {
				if (seen.has(c)) issues.push({ path: ['kappa', 'categories', i], message: `duplicate category "${c}"` });
				seen.add(c);
			});
			if (weights !== 'none' && seen.size < 2) {
				issues.push({ path: ['kappa', 'categories'], message: 'weighted kappa needs at least 2 categories' });
			}
			kappa.pairs.forEach((pair, i) => {
				(Array.isArray(pair) ? pair : []).forEach((l, j) => {
					if (!seen.has(l)) {
						issues.push({ path: ['kappa', 'pairs', i, j], message: `label "${l}" is not in kappa.categories` });
					}
				});
			});
		}
	}

	const icc = input.icc;
	if (icc && Array.isArray(icc.ratings) && Array.isArray(icc.ratings[0])) {
		const k = icc.ratings[0].length;
		if (k < 2) {
			issues.push({ path: ['icc', 'ratings', 0], message: `expected at least 2 ratings (raters), got ${k}` });
		}
		icc.ratings.forEach((row, i) => {
			if (i > 0 && Array.isArray(row) && row.length !== k) {
				issues.push({
					path: ['icc', 'ratings', i],
					message: `expected ${k} ratings like row 0, got ${row.length} (rows must not be ragged; missing values are not allowed)`
				});
			}
		});
	}
	return issues;
}

/**
 * The full input schema: structure, then the cross-field rules. The second stage runs only
 * if the first passes (a pipe), so its checks can rely on the types.
 */
export const agreementInputSchema = agreementStructureSchema.pipe(
	z.custom<AgreementInput>().superRefine((value, ctx) => {
		for (const issue of crossFieldIssues(value)) {
			ctx.addIssue({ code: 'custom', path: issue.path, message: issue.message });
		}
	})
);

// ---------------------------------------------------------------------------------------------
// Messages
// ---------------------------------------------------------------------------------------------

/** `['icc', 'ratings', 2, 1]` → `icc.ratings[2][1]`; the root is `input`. */
export function formatPath(path: ReadonlyArray<PropertyKey>): string {
	if (path.length === 0) return 'input';
	let out = '';
	for (const segment of path) {
		if (typeof segment === 'number') out += `[${segment}]`;
		else {
			const key = String(segment);
			const plain = /^[A-Za-z_$][\w$]*$/.test(key);
			out += plain ? (out === '' ? key : `.${key}`) : `[${JSON.stringify(key)}]`;
		}
	}
	return out;
}

function describe(value: unknown): string {
	if (value === null) return 'null';
	if (Array.isArray(value)) return 'an array';
	if (typeof value === 'string') return `a string (${JSON.stringify(value.length > 20 ? value.slice(0, 20) + '…' : value)})`;
	if (typeof value === 'number') return Number.isFinite(value) ? `a number (${value})` : String(value);
	if (typeof value === 'object') return 'an object';
	if (value === undefined) return 'nothing';
	return `a ${typeof value}`;
}

function at(root: unknown, path: ReadonlyArray<PropertyKey>): unknown {
	let node: unknown = root;
	for (const segment of path) {
		if (node === null || typeof node !== 'object') return undefined;
		node = (node as Record<PropertyKey, unknown>)[segment as string];
	}
	return node;
}

const article = (noun: string) => (/^[aeiou]/.test(noun) ? `an ${noun}` : `a ${noun}`);

/**
 * One line per problem, `path: message`. Only the first problem at any one path is kept
 * (zod can report a failed type and a failed length for the same value).
 */
export function formatIssues(issues: ReadonlyArray<z.core.$ZodIssue>, input: unknown): string[] {
	const lines: string[] = [];
	const seen = new Set<string>();
	const push = (path: ReadonlyArray<PropertyKey>, message: string) => {
		const where = formatPath(path);
		if (seen.has(where)) return;
		seen.add(where);
		lines.push(`${where}: ${message}`);
	};
	for (const issue of issues) {
		switch (issue.code) {
			case 'invalid_type': {
				const received = describe(at(input, issue.path));
				// Our own messages on tuples and rows explain the expected shape better.
				const custom = !issue.message.startsWith('Invalid input');
				push(issue.path, custom ? `${issue.message}, got ${received}` : `expected ${article(issue.expected)}, got ${received}`);
				break;
			}
			case 'unrecognized_keys': {
				const parent = formatPath(issue.path);
				const known = issue.path.length === 0 ? ` (expected ${AGREEMENT_KEYS.join(', ')})` : '';
				for (const key of issue.keys) {
					push([...issue.path, key], `unknown key${parent === 'input' ? known : ` in ${parent}`}`);
				}
				break;
			}
			case 'invalid_value':
				push(issue.path, `expected one of ${issue.values.map((v) => JSON.stringify(v)).join(', ')}, got ${describe(at(input, issue.path))}`);
				break;
			case 'too_small':
			case 'too_big': {
				const value = at(input, issue.path);
				const got = Array.isArray(value) ? `, got ${value.length}` : '';
				const message = issue.message.startsWith('Too ')
					? `expected ${issue.code === 'too_small' ? 'at least' : 'at most'} ${String(issue.code === 'too_small' ? issue.minimum : issue.maximum)} items`
					: issue.message;
				push(issue.path, `${message}${got}`);
				break;
			}
			default:
				push(issue.path, issue.message);
		}
	}
	return lines;
}

export type ParsedAgreementInput = { success: true; data: AgreementInput } | { success: false; errors: string[] };

/** Validate already-decoded JSON against {@link agreementInputSchema}. */
export function parseAgreementInput(raw: unknown): ParsedAgreementInput {
	const result = agreementInputSchema.safeParse(raw);
	if (result.success) return { success: true, data: result.data };
	return { success: false, errors: formatIssues(result.error.issues, raw) };
}

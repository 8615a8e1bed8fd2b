/**
 * Fuzzing the batch commands (reconcile, agreement) in-process through their exported `run`, and
 * the CSV validator, with fast-check: thousands of malformed inputs — random text, random JSON,
 * valid documents with one value replaced, truncated or spliced — must end in exit 0 (valid
 * output) or exit 2 (problems on stderr, nothing on stdout), never a throw. The malformed-input cases
 * are also run as one chunk, as the command line passes stdin (the real command line: scoring-cli).
 */
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { runCommand } from '../helpers/cli';
import { PassThrough, Readable } from 'node:stream';
import { run as reconcileRun } from '../../scripts/cli/reconcile';
import { run as agreementRun } from '../../scripts/cli/agreement';
import { validateCsvText } from '../../src/lib/catalog/parse';
import { COLUMNS } from '../../src/lib/catalog/csv';
import { CATEGORY_NAMING, CATEGORY_NAMING_NORM, memoryIndex, specExample, tileBuild, wordRecall } from './scoring-fixtures';
import { SHROUT_FLEISS } from './agreement-fixtures';

/** Documents with the other norm forms (issue 14): a table, a composite, a regression norm, a percentile-only table with bands. */
function formsBases(): unknown[] {
	const regression = {
		tests: [CATEGORY_NAMING],
		norms: [CATEGORY_NAMING_NORM, { test: 'category-naming', group: 'e12', mean: 40, sd: 10 }],
		protocol: { group: 'all', covariates: { age: 46, education: 14 } },
		passes: [
			{ scorer: 'a', scores: { 'category-naming': { raw: 48, z: '1.01', standard: 115, t: 60, percentile: 84 } } },
			{ scorer: 'b', scores: { 'category-naming': { raw: '47', z: '-1.01', standard: 112, t: 61 } } }
		]
	};
	const bands = {
		tests: [{ id: 'error-count', direction: 'lower_better', raw: { min: 0, max: 30, decimals: 0 }, reported: ['percentile'] }],
		norms: [
			{
				test: 'error-count',
				group: 'a30',
				form: 'table',
				scale: 'percentile',
				rows: [
					{ raw: [0, 0], percentile: '>=75' },
					{ raw: [1, 2], percentile: '50-74' },
					{ raw: [3, 5], percentile: '25-49' },
					{ raw: [6, 30], percentile: '<=9' }
				]
			},
			{
				test: 'error-count',
				group: 'a40',
				form: 'table',
				scale: 'percentile',
				rows: [
					{ raw: [0, 1], percentile: '>=75' },
					{ raw: [2, 30], percentile: '<=74' }
				]
			}
		],
		protocol: { group: 'a30' },
		passes: [
			{ scorer: 'a', scores: { 'error-count': { raw: 4, percentile: '25 \u2013 49' } } },
			{ scorer: 'b', scores: { 'error-count': { raw: 7, percentile: 30 } } }
		]
	};
	return [
		tileBuild({ scaled: 13, percentile: 95 }, { raw: 17, percentile: '90' }),
		memoryIndex({ 'tile-build': { scaled: 13 }, 'memory-index': { sum: 26, standard: 117 } }, { 'word-recall': { raw: null }, 'memory-index': { sum: 72 } }),
		regression,
		bands
	];
}

type Runner = typeof reconcileRun;
export const FUZZ_RUNS = Number(process.env.FUZZ_RUNS ?? 1000);
let cases = 0;

async function runWith(run: Runner, chunks: (string | Uint8Array)[]) {
	const out = new PassThrough();
	const err = new PassThrough();
	let stdout = '';
	let stderr = '';
	out.setEncoding('utf8').on('data', (d: string) => (stdout += d));
	err.setEncoding('utf8').on('data', (d: string) => (stderr += d));
	const code = await run(Readable.from(chunks.map((c) => (typeof c === 'string' ? Buffer.from(c) : Buffer.from(c)))), out, err);
	await new Promise((r) => setImmediate(r));
	cases++;
	return { code, stdout, stderr };
}

function checkOutcome(o: { code: number; stdout: string; stderr: string }, input: unknown) {
	const ctx = JSON.stringify(input)?.slice(0, 300);
	expect([0, 2], `exit ${o.code} for ${ctx}\n${o.stderr}`).toContain(o.code);
	if (o.code === 2) {
		expect(o.stdout, `stdout must be empty on bad input: ${ctx}`).toBe('');
		expect(o.stderr.trim().length, ctx).toBeGreaterThan(0);
		expect(o.stderr, ctx).not.toMatch(/\n\s+at |TypeError|RangeError|ReferenceError|undefined is not/);
	} else {
		expect(() => JSON.parse(o.stdout), ctx).not.toThrow();
	}
}

/** Replace the value at one random path of a document with an arbitrary JSON value. */
function mutate(doc: unknown, pathPick: number, replacement: unknown, mode: number): unknown {
	const paths: (string | number)[][] = [];
	const walk = (v: unknown, p: (string | number)[]) => {
		paths.push(p);
		if (Array.isArray(v)) v.forEach((x, i) => walk(x, [...p, i]));
		else if (v && typeof v === 'object') for (const [k, x] of Object.entries(v)) walk(x, [...p, k]);
	};
	walk(doc, []);
	const copy = structuredClone(doc) as Record<string | number, unknown>;
	const path = paths[pathPick % paths.length];
	if (path.length === 0) return replacement;
	let parent = copy as Record<string | number, unknown>;
	for (const k of path.slice(0, -1)) parent = parent[k] as Record<string | number, unknown>;
	const last = path[path.length - 1];
	if (mode === 0) delete parent[last];
	else if (mode === 1 && Array.isArray(parent)) parent.push(replacement);
	else parent[last] = replacement;
	return copy;
}

const oddValue = fc.oneof(
	fc.jsonValue(),
	fc.constantFrom(
		null,
		'',
		' ',
		'NaN',
		'Infinity',
		'-0',
		'1e309',
		'0x1F',
		'१२',
		'٣',
		'1,5',
		'74 ',
		'\u0000',
		'__proto__',
		-1,
		1e308,
		-1e-308,
		2 ** 53 + 1,
		[],
		{},
		[[[]]],
		{ __proto__: null }
	),
	fc.string({ unit: 'grapheme', maxLength: 12 }),
	fc.double(),
	fc.integer()
);

describe('reconcile batch command: malformed input never crashes it', () => {
	it('random text and bytes', async () => {
		await fc.assert(
			fc.asyncProperty(fc.oneof(fc.string({ maxLength: 200 }), fc.string({ unit: 'binary', maxLength: 200 })), async (text) => {
				checkOutcome(await runWith(reconcileRun, [text]), text);
			}),
			{ numRuns: FUZZ_RUNS }
		);
	});

	it('random JSON values, singly and in arrays', async () => {
		await fc.assert(
			fc.asyncProperty(fc.jsonValue({ maxDepth: 4 }), async (v) => {
				checkOutcome(await runWith(reconcileRun, [JSON.stringify(v)]), v);
			}),
			{ numRuns: FUZZ_RUNS }
		);
	});

	it('valid documents with one value replaced, removed or appended (single and in arrays, cut into chunks)', async () => {
		const bases = [specExample(), wordRecall(), wordRecall({ raw: 92 }, { z: -1.07 }), ...formsBases()];
		await fc.assert(
			fc.asyncProperty(
				fc.nat(bases.length - 1),
				fc.nat(10_000),
				oddValue,
				fc.nat(2),
				fc.boolean(),
				fc.integer({ min: 1, max: 64 }),
				async (b, pick, value, mode, asArray, chunk) => {
					const doc = mutate(bases[b], pick, value, mode);
					const text = JSON.stringify(asArray ? [bases[(b + 1) % bases.length], doc] : doc) ?? '';
					const chunks: string[] = [];
					for (let i = 0; i < text.length; i += chunk) chunks.push(text.slice(i, i + chunk));
					checkOutcome(await runWith(reconcileRun, chunks), doc);
				}
			),
			{ numRuns: FUZZ_RUNS * 3 }
		);
	}, 240_000);

	it('tables with rows moved, split, dropped or re-scored; composites with parts and norms shuffled', async () => {
		const bases = formsBases() as {
			norms: { rows?: { raw?: number[]; sum?: number[]; score?: number; percentile?: unknown }[] }[];
			composites?: { parts: string[] }[];
		}[];
		await fc.assert(
			fc.asyncProperty(
				fc.nat(bases.length - 1),
				fc.nat(50),
				fc.nat(50),
				fc.integer({ min: -3, max: 3 }),
				fc.constantFrom('lo', 'hi', 'drop', 'dup', 'score', 'pct', 'swap', 'parts'),
				oddValue,
				async (b, ni, ri, delta, op, odd) => {
					const doc = structuredClone(bases[b]);
					const norm = doc.norms[ni % doc.norms.length];
					const rows = norm.rows;
					if (op === 'parts' && doc.composites)
						doc.composites[0].parts = [...doc.composites[0].parts].reverse().concat(ri % 2 ? [JSON.stringify(odd) ?? 'x'] : []);
					else if (rows && rows.length) {
						const i = ri % rows.length;
						const key = rows[i].raw ? 'raw' : 'sum';
						const range = rows[i][key] as number[];
						if (op === 'lo') range[0] += delta;
						else if (op === 'hi') range[1] += delta / 10;
						else if (op === 'drop') rows.splice(i, 1);
						else if (op === 'dup') rows.splice(i, 0, structuredClone(rows[i]));
						else if (op === 'score') rows[i].score = (rows[i].score ?? 10) + delta * 7;
						else if (op === 'pct') rows[i].percentile = odd;
						else if (op === 'swap' && i > 0) [rows[i - 1], rows[i]] = [rows[i], rows[i - 1]];
					}
					checkOutcome(await runWith(reconcileRun, [JSON.stringify(doc)]), doc);
				}
			),
			{ numRuns: FUZZ_RUNS * 2 }
		);
	}, 240_000);

	it('truncated and spliced documents, and multi-byte characters split across chunks', async () => {
		const good = JSON.stringify([specExample(), wordRecall(), ...formsBases()]);
		await fc.assert(
			fc.asyncProperty(fc.nat(good.length), fc.nat(good.length), fc.string({ unit: 'grapheme', maxLength: 8 }), async (a, b, insert) => {
				const text = good.slice(0, Math.min(a, b)) + insert + good.slice(Math.max(a, b));
				const bytes = Buffer.from(text);
				const cut = bytes.length ? a % bytes.length : 0;
				checkOutcome(await runWith(reconcileRun, [bytes.subarray(0, cut), bytes.subarray(cut)]), text);
			}),
			{ numRuns: FUZZ_RUNS }
		);
	});
});

describe('agreement batch command: malformed input never crashes it', () => {
	const base = {
		kappa: {
			pairs: [
				['a', 'a'],
				['a', 'b'],
				['b', 'b'],
				['b', 'a'],
				['a', 'a']
			],
			weights: 'quadratic',
			categories: ['a', 'b']
		},
		icc: { ratings: SHROUT_FLEISS },
		bland_altman: {
			pairs: [
				[100, 102],
				[98, 97],
				[110, 108],
				[95, 99]
			]
		}
	};

	it('random text and random JSON', async () => {
		await fc.assert(
			fc.asyncProperty(
				fc.oneof(
					fc.string({ maxLength: 200 }),
					fc.jsonValue({ maxDepth: 4 }).map((v) => JSON.stringify(v))
				),
				async (text) => {
					checkOutcome(await runWith(agreementRun, [text]), text);
				}
			),
			{ numRuns: FUZZ_RUNS }
		);
	});

	it('a valid request with one value replaced, removed or appended', async () => {
		await fc.assert(
			fc.asyncProperty(fc.nat(10_000), oddValue, fc.nat(2), async (pick, value, mode) => {
				const doc = mutate(base, pick, value, mode);
				checkOutcome(await runWith(agreementRun, [JSON.stringify(doc) ?? '']), doc);
			}),
			{ numRuns: FUZZ_RUNS * 2 }
		);
	});
});

describe('CSV validator: malformed files give row errors, never a throw', () => {
	const ctx = { testCodes: new Set(['word-recall', 'speeded-match']), domains: new Set(['memory', 'processing-speed']) };
	const cell = fc.oneof(
		fc.constantFrom(
			'',
			'word-recall',
			'speeded-match',
			'a30',
			'360',
			'479',
			'-1',
			'1e9',
			'NaN',
			'24.5',
			'4.2',
			'0',
			'F',
			'M',
			'X',
			'=cmd|calc',
			'+1',
			'@SUM(1)',
			'"',
			'""',
			'a,b',
			'\r',
			'\n',
			'\uFEFF',
			'\u0000',
			'higher',
			'lower',
			'z;standard',
			'{"z":[-4,4]}',
			'{'
		),
		fc.string({ maxLength: 10 }),
		fc.double().map(String)
	);
	const quote = (c: string) => (/[",\r\n]/.test(c) && c.length % 3 === 0 ? `"${c.replace(/"/g, '""')}"` : c);

	for (const kind of ['norms', 'tests'] as const) {
		it(`${kind}: generated rows under the real header, a shuffled header, or none`, () => {
			fc.assert(
				fc.property(
					fc.array(fc.array(cell, { minLength: 0, maxLength: COLUMNS[kind].length + 2 }), { maxLength: 12 }),
					fc.nat(3),
					fc.constantFrom(',', ';', '\t', '|'),
					fc.constantFrom('\n', '\r\n', '\r'),
					(rows, headerMode, delim, eol) => {
						const cols = [...COLUMNS[kind]];
						const header = headerMode === 0 ? cols : headerMode === 1 ? [...cols].reverse() : headerMode === 2 ? cols.slice(0, 3) : [];
						const text = [header.join(delim), ...rows.map((r) => r.map(quote).join(delim))].join(eol);
						const { result } = validateCsvText(kind, text, ctx);
						cases++;
						expect(result).toBeDefined();
						expect(Array.isArray(result.fileErrors)).toBe(true);
						expect(JSON.stringify(result)).not.toMatch(/\n\s+at /);
					}
				),
				{ numRuns: FUZZ_RUNS * 2 }
			);
		});
		it(`${kind}: random text and bytes`, () => {
			fc.assert(
				fc.property(fc.oneof(fc.string({ maxLength: 400 }), fc.string({ unit: 'binary', maxLength: 400 })), (text) => {
					const { result } = validateCsvText(kind, text, ctx);
					cases++;
					expect(result).toBeDefined();
				}),
				{ numRuns: FUZZ_RUNS }
			);
		});
	}
});

describe('malformed input as the command line passes it (one chunk)', () => {
	it.each([
		['reconcile', '{"tests": ['],
		['reconcile', '[{"tests":[]}, 42, "x"]'],
		['reconcile', '\u0000\u0001\u00ff'],
		['agreement', '{"kappa": {"pairs": [[1]]}}'],
		['agreement', 'null']
	] as const)('%s < %j: exit 2, nothing on stdout, no stack', async (cmd, input) => {
		const r = await runCommand(cmd, input);
		expect(r.code, r.stderr).toBe(2);
		expect(r.stdout).toBe('');
		expect(r.stderr).not.toMatch(/\n\s+at /);
	});

	it('reports how many cases ran', () => {
		console.log(`[fuzz-cli] ${cases} generated cases (FUZZ_RUNS=${FUZZ_RUNS})`);
		expect(cases).toBeGreaterThan(FUZZ_RUNS * 10);
	});
});

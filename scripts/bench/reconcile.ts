/**
 * `npm run bench:reconcile` — throughput of the reconciler.
 *
 * Generates 10,000 protocols × 10 tests (invented norms, three groups per test; both passes mostly
 * agree with the recomputation, with about 5 % of fields slipped in realistic ways), then times in
 * the same run:
 *   - the engine alone: reconcile() over the already-parsed batch;
 *   - the floor: JSON.parse of the batch text plus JSON.stringify of the parsed batch.
 * Prints both (median of several runs), protocols per second and the ratio engine / floor
 * (goal ≤ 3), then one `BENCH_JSON {…}` line, also written to .bench/reconcile.json.
 *
 * A second batch of the same size exercises the other norm forms (issue 14): per protocol 10 tests —
 * 6 with conversion tables (two of them with a percentile column), 2 with regression norms, 1
 * percentile-only test with bands, 1 mean/SD — three groups each, and 2 composites (one normed by
 * mean/SD of the sum, one by a sum table); slips include neighbouring table rows, other groups,
 * composite sums added up wrong and composites carried from a wrong part. Its figures are under
 * `forms` in the JSON line.
 *
 * Options: --protocols N (default 10000), --forms-protocols N (default protocols / 5), --runs N (default 5),
 * --out PATH.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import { performance } from 'node:perf_hooks';
import { rng } from './prng';
import {
	parseReconcileInput,
	reconcile,
	referenceScore,
	testReferences,
	compositeReferences,
	compositeSpan,
	zFromRaw,
	type AnyNormEntry,
	type CompositeDef,
	type CompositeNormEntry,
	type Entered,
	type FieldValues,
	type NormDef,
	type NormEntry,
	type ReconcileInput,
	type TestDef
} from '../../src/lib/scoring';

function arg(name: string, fallback: string): string {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
}

const PROTOCOLS = Number(arg('protocols', '10000'));
/** Each forms protocol carries its tables (about 24 KB of JSON), so that batch is smaller by default. */
const FORMS_PROTOCOLS = Number(arg('forms-protocols', String(Math.max(1, Math.round(PROTOCOLS / 5)))));
const RUNS = Number(arg('runs', '5'));
const OUT = arg('out', '.bench/reconcile.json');
const TESTS_PER_PROTOCOL = 10;
const ERROR_RATE = 0.05;

const rand = rng(20240607);
const pick = <T>(xs: readonly T[]): T => xs[Math.floor(rand() * xs.length)];

const GROUPS = ['a20', 'a30', 'a40'];
const TESTS: TestDef[] = Array.from({ length: TESTS_PER_PROTOCOL }, (_, i) => ({
	id: `test-${i}`,
	direction: i % 3 === 0 ? 'lower_better' : 'higher_better',
	raw: { min: 0, max: 100, decimals: i % 4 === 0 ? 1 : 0 },
	reported: i % 2 === 0 ? ['z', 'standard', 'scaled', 't', 'percentile'] : ['scaled', 'percentile']
}));
const NORMS: NormDef[] = TESTS.flatMap((t, i) => GROUPS.map((g, gi) => ({ test: t.id, group: g, mean: 30 + i * 2 - gi * 1.5, sd: 5 + (i % 5) + gi * 0.3 })));

function slip(field: string, v: number): number | string | null {
	switch (pick(['transpose', 'sign', 'missing', 'digit', 'shift', 'off_by_one'] as const)) {
		case 'transpose': {
			const s = String(Math.abs(v));
			return s.length >= 2 ? Number((v < 0 ? '-' : '') + s[1] + s[0] + s.slice(2)) : v + 1;
		}
		case 'sign':
			return field === 'z' ? -v : 2 * (field === 'percentile' ? 50 : field === 'scaled' ? 10 : field === 't' ? 50 : 100) - v;
		case 'missing':
			return null;
		case 'digit':
			return v + (field === 'z' ? 0.1 : 10);
		case 'shift':
			return v * 10;
		case 'off_by_one':
			return v + (field === 'z' ? 0.01 : 1);
	}
}

function makeProtocol(): ReconcileInput {
	const group = pick(GROUPS);
	const first: Record<string, FieldValues> = {};
	const second: Record<string, FieldValues> = {};
	for (const t of TESTS) {
		const norm = NORMS.find((n) => n.test === t.id && n.group === group) as NormDef;
		const raw = Math.round((norm.mean + (rand() * 4 - 2) * norm.sd) * 10 ** t.raw.decimals) / 10 ** t.raw.decimals;
		const rawClamped = Math.min(t.raw.max, Math.max(t.raw.min, raw));
		const z = zFromRaw(rawClamped, norm.mean, norm.sd, t.direction);
		const entry = (): FieldValues => {
			const e: FieldValues = { raw: rand() < ERROR_RATE / 2 ? rawClamped + 1 : rawClamped };
			for (const f of t.reported) {
				const ref = referenceScore(f, z);
				const v = rand() < ERROR_RATE ? slip(f, ref) : ref;
				e[f] = f === 'z' && typeof v === 'number' ? v.toFixed(2) : v;
			}
			return e;
		};
		first[t.id] = entry();
		second[t.id] = entry();
	}
	return {
		tests: TESTS,
		norms: NORMS,
		protocol: { group },
		passes: [
			{ scorer: 'scorer-a', scores: first },
			{ scorer: 'scorer-b', scores: second }
		]
	};
}

// ---------------------------------------------------------------- the second batch: tables, regression, bands, composites

const F_TESTS: TestDef[] = Array.from({ length: TESTS_PER_PROTOCOL }, (_, i) => {
	if (i < 6)
		return {
			id: `sub-${i}`,
			direction: 'higher_better',
			raw: { min: 0, max: 40 + i * 4, decimals: 0 },
			reported: i % 2 === 0 ? ['scaled', 'percentile'] : ['scaled']
		};
	if (i < 8)
		return {
			id: `reg-${i}`,
			direction: i === 7 ? 'lower_better' : 'higher_better',
			raw: { min: 0, max: 120, decimals: 0 },
			reported: ['z', 'standard', 't', 'percentile']
		};
	if (i === 8) return { id: 'errors', direction: 'lower_better', raw: { min: 0, max: 40, decimals: 0 }, reported: ['percentile'] };
	return { id: 'plain', direction: 'higher_better', raw: { min: 0, max: 60, decimals: 1 }, reported: ['z', 'standard', 'percentile'] };
});
const BANDS = ['>=75', '50-74', '25-49', '10-24', '5-9', '2-4', '<=1'];
const COVARIATES = { age: 52, education: 12, sex: 1 };

/** An invented scaled-score table: rows of one to three raw points, scores 1–19 rising with the raw score. */
function scaledTable(max: number, shift: number, withPct: boolean): { raw: [number, number]; score: number; percentile?: number | string }[] {
	const rows: { raw: [number, number]; score: number; percentile?: number | string }[] = [];
	for (let lo = 0; lo <= max;) {
		const hi = Math.min(max, lo + ((lo + shift) % 3));
		const score = Math.min(19, 1 + Math.floor((18 * lo) / (max + 1)) + (shift % 2));
		rows.push({ raw: [lo, hi], score });
		lo = hi + 1;
	}
	if (withPct)
		for (const r of rows)
			r.percentile = r.score <= 2 ? '<1' : r.score >= 18 ? '>99' : Math.min(99, Math.max(1, Math.round(100 / (1 + Math.exp(-(r.score - 10) / 1.7)))));
	return rows;
}

const F_NORMS: AnyNormEntry[] = F_TESTS.flatMap((t, i): AnyNormEntry[] =>
	GROUPS.map((g, gi): NormEntry => {
		if (i < 6) return { test: t.id, group: g, form: 'table', scale: 'scaled', rows: scaledTable(t.raw.max, gi + i, i < 2) };
		if (i < 8)
			return {
				test: t.id,
				group: g,
				form: 'regression',
				intercept: 40 + gi * 3,
				coefficients: { age: -0.2 + gi * 0.02, education: 1.1, sex: 0.8 * (i - 6) },
				sd: 9 + gi
			};
		if (i === 8) {
			const cuts = [
				[0, 0],
				[1, 2],
				[3, 5],
				[6, 9],
				[10, 14],
				[15, 20 + gi],
				[21 + gi, 40]
			];
			return {
				test: t.id,
				group: g,
				form: 'table',
				scale: 'percentile',
				rows: cuts.map(([a, b], k) => ({ raw: [a, b] as [number, number], percentile: BANDS[k] }))
			};
		}
		return { test: t.id, group: g, mean: 31 - gi, sd: 7.5 };
	})
);
const F_COMPOSITES: CompositeDef[] = [
	{ id: 'verbal-index', parts: ['sub-0', 'sub-1', 'sub-2'], part_field: 'scaled', reported: ['sum', 'standard', 'percentile'] },
	{ id: 'speed-index', parts: ['sub-3', 'sub-4', 'sub-5'], part_field: 'scaled', reported: ['sum', 'standard', 'percentile'] }
];
const C_NORMS: CompositeNormEntry[] = GROUPS.flatMap((g, gi): CompositeNormEntry[] => {
	const [lo, hi] = compositeSpan(F_COMPOSITES[1], F_TESTS);
	const rows: { sum: [number, number]; score: number }[] = [];
	for (let s = lo; s <= hi; s += 2)
		rows.push({ sum: [s, Math.min(hi, s + 1)], score: Math.min(160, Math.max(40, Math.round(100 + (15 * (s - 30 - gi)) / 7.5))) });
	return [
		{ composite: 'verbal-index', group: g, mean: 30 + gi, sd: 7.5 },
		{ composite: 'speed-index', group: g, form: 'table', scale: 'standard', rows }
	];
});
const F_ALL_NORMS: AnyNormEntry[] = [...F_NORMS, ...C_NORMS];

function formsProtocol(): ReconcileInput {
	const group = pick(GROUPS);
	const passes = [{} as Record<string, Record<string, Entered>>, {} as Record<string, Record<string, Entered>>];
	const own: Record<string, [number | null, number | null]> = {};
	for (const t of F_TESTS) {
		const norm = F_NORMS.find((n) => !('composite' in n) && n.test === t.id && n.group === group) as NormEntry;
		const f = 10 ** t.raw.decimals;
		const raw = Math.round(rand() * t.raw.max * 0.8 * f + t.raw.max * 0.1 * f) / f;
		const refs = testReferences(t, norm, raw, COVARIATES) as Record<string, number | string>;
		own[t.id] = [null, null];
		for (const [k, scores] of passes.entries()) {
			let r = raw;
			let rr = refs;
			if (rand() < ERROR_RATE / 2) {
				r = Math.min(t.raw.max, raw + 1);
				rr = testReferences(t, norm, r, COVARIATES) as Record<string, number | string>;
			}
			const e: Record<string, Entered> = { raw: r };
			for (const fld of t.reported) {
				let v: Entered = rr[fld];
				if (rand() < ERROR_RATE) {
					let other: Entered = null;
					if (norm.form === 'table' && rand() < 0.5) {
						// a look-up slip: the row just above or below
						const at = norm.rows.findIndex((row) => row.raw[0] <= r && r <= row.raw[1]);
						const nb = norm.rows[at + (rand() < 0.5 ? -1 : 1)];
						if (nb) other = (testReferences(t, norm, nb.raw[0], COVARIATES) as Record<string, Entered>)[fld];
					} else if (norm.form === 'table') {
						other = (
							testReferences(t, F_NORMS.find((n) => !('composite' in n) && n.test === t.id && n.group !== group) as NormEntry, r, COVARIATES) as Record<
								string,
								Entered
							>
						)[fld];
					}
					v = other ?? (typeof v === 'number' ? slip(fld, v) : '10-24');
				}
				e[fld] = fld === 'z' && typeof v === 'number' ? v.toFixed(2) : v;
			}
			scores[t.id] = e;
			if (t.reported.includes('scaled')) own[t.id][k] = Number(e.scaled);
		}
	}
	for (const c of F_COMPOSITES) {
		const span = compositeSpan(c, F_TESTS);
		const norm = C_NORMS.find((n) => n.composite === c.id && n.group === group) as CompositeNormEntry;
		for (const [k, scores] of passes.entries()) {
			const parts = c.parts.map((p) => own[p][k]);
			let sum = parts.every((x) => x !== null && Number.isFinite(x)) ? (parts as number[]).reduce((a, b) => a + b, 0) : 30;
			if (rand() < ERROR_RATE) sum += rand() < 0.5 ? 10 : -1; // an addition slip
			const refs = compositeReferences(norm, Math.min(span[1], Math.max(span[0], sum)), span) as Record<string, number>;
			scores[c.id] = { sum, standard: refs.standard, percentile: rand() < ERROR_RATE ? refs.percentile + 1 : refs.percentile };
		}
	}
	return {
		tests: F_TESTS,
		norms: F_ALL_NORMS,
		composites: F_COMPOSITES,
		protocol: { group, covariates: COVARIATES },
		passes: [
			{ scorer: 'scorer-a', scores: passes[0] },
			{ scorer: 'scorer-b', scores: passes[1] }
		]
	} as ReconcileInput;
}

function median(xs: number[]): number {
	const s = [...xs].sort((a, b) => a - b);
	return s[Math.floor(s.length / 2)];
}

interface Measured {
	protocols: number;
	fields_compared: number;
	discrepancies: number;
	input_bytes: number;
	engine_ms: number;
	floor_ms: number;
}

/** Time the engine over a parsed batch and JSON.parse + JSON.stringify of its text; medians of RUNS after one warm-up. */
function measure(docs: ReconcileInput[]): Measured {
	const text = JSON.stringify(docs);
	// the engine reads a parsed batch, as the server and the batch command hand it over
	const parsed = JSON.parse(text) as ReconcileInput[];
	let sink = 0;
	const engineMs: number[] = [];
	const floorMs: number[] = [];
	let discrepancies = 0;
	let fields = 0;
	for (let run = 0; run <= RUNS; run++) {
		// run 0 warms up both paths and is not counted
		let t0 = performance.now();
		let d = 0;
		let f = 0;
		for (const doc of parsed) {
			const r = reconcile(doc);
			d += r.summary.discrepancies;
			f += r.summary.fields_compared;
		}
		const e = performance.now() - t0;
		t0 = performance.now();
		const again = JSON.parse(text);
		sink += JSON.stringify(again).length;
		const fl = performance.now() - t0;
		if (run > 0) {
			engineMs.push(e);
			floorMs.push(fl);
		}
		discrepancies = d;
		fields = f;
	}
	if (sink < 0) console.log(sink);
	return { protocols: docs.length, fields_compared: fields, discrepancies, input_bytes: text.length, engine_ms: median(engineMs), floor_ms: median(floorMs) };
}

const plain = measure(Array.from({ length: PROTOCOLS }, makeProtocol));
const formsBatch = Array.from({ length: FORMS_PROTOCOLS }, formsProtocol);
const kindsSeen = new Map<string, number>();
for (const doc of formsBatch.slice(0, 2000)) for (const d of reconcile(doc).discrepancies) kindsSeen.set(d.kind, (kindsSeen.get(d.kind) ?? 0) + 1);
for (const [i, doc] of formsBatch.slice(0, 50).entries()) {
	const v = parseReconcileInput(JSON.parse(JSON.stringify(doc)));
	if (!v.ok) throw new Error(`generated protocol ${i} is not valid batch input: ${v.errors.join('; ')}`);
}
const forms = measure(formsBatch);

const engine = plain.engine_ms;
const floor = plain.floor_ms;
const discrepancies = plain.discrepancies;
const fields = plain.fields_compared;
const text = { length: plain.input_bytes };
const formsRatio = Number((forms.engine_ms / forms.floor_ms).toFixed(2));
const result = {
	bench: 'reconcile',
	protocols: PROTOCOLS,
	tests_per_protocol: TESTS_PER_PROTOCOL,
	fields_compared: fields,
	discrepancies,
	discrepancy_rate: Number((discrepancies / fields).toFixed(4)),
	input_bytes: text.length,
	runs: RUNS,
	engine_ms: Number(engine.toFixed(1)),
	floor_ms: Number(floor.toFixed(1)),
	engine_protocols_per_s: Math.round(PROTOCOLS / (engine / 1000)),
	floor_protocols_per_s: Math.round(PROTOCOLS / (floor / 1000)),
	ratio: Number((engine / floor).toFixed(2)),
	goal_ratio: 3,
	forms: {
		protocols: forms.protocols,
		tests_per_protocol: TESTS_PER_PROTOCOL,
		composites_per_protocol: F_COMPOSITES.length,
		fields_compared: forms.fields_compared,
		discrepancies: forms.discrepancies,
		input_bytes: forms.input_bytes,
		engine_ms: Number(forms.engine_ms.toFixed(1)),
		floor_ms: Number(forms.floor_ms.toFixed(1)),
		engine_protocols_per_s: Math.round(forms.protocols / (forms.engine_ms / 1000)),
		ratio: formsRatio,
		kinds_in_first_2000: Object.fromEntries([...kindsSeen].sort((a, b) => b[1] - a[1]))
	},
	node: process.version
};

console.log(`reconcile benchmark: ${PROTOCOLS} protocols × ${TESTS_PER_PROTOCOL} tests, ${(text.length / 1e6).toFixed(1)} MB of JSON, median of ${RUNS} runs`);
console.log(`  ${fields} fields compared, ${discrepancies} discrepancies (${(100 * result.discrepancy_rate).toFixed(1)} %)`);
console.log(`  engine alone:               ${result.engine_ms} ms  (${result.engine_protocols_per_s} protocols/s)`);
console.log(`  JSON.parse + JSON.stringify: ${result.floor_ms} ms  (${result.floor_protocols_per_s} protocols/s)`);
console.log(`  ratio engine / floor:        ${result.ratio}  (goal ≤ ${result.goal_ratio}: ${result.ratio <= 3 ? 'met' : 'NOT met'})`);
console.log(
	`tables, regression, bands, composites: ${forms.protocols} protocols × ${TESTS_PER_PROTOCOL} tests + ${F_COMPOSITES.length} composites, ${(forms.input_bytes / 1e6).toFixed(1)} MB of JSON`
);
console.log(
	`  ${forms.fields_compared} fields compared, ${forms.discrepancies} discrepancies (${((100 * forms.discrepancies) / forms.fields_compared).toFixed(1)} %)`
);
console.log(`  kinds (first 2000 protocols): ${[...kindsSeen].map(([k, n]) => `${k} ${n}`).join(', ')}`);
console.log(`  engine alone:               ${result.forms.engine_ms} ms  (${result.forms.engine_protocols_per_s} protocols/s)`);
console.log(`  JSON.parse + JSON.stringify: ${result.forms.floor_ms} ms`);
console.log(`  ratio engine / floor:        ${formsRatio}  (goal ≤ 3: ${formsRatio <= 3 ? 'met' : 'NOT met'})`);
const line = JSON.stringify(result);
console.log(`BENCH_JSON ${line}`);
mkdirSync(dirname(OUT), { recursive: true });
writeFileSync(OUT, line + '\n');

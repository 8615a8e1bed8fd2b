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
 * Options: --protocols N (default 10000), --runs N (default 5), --out PATH.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import { performance } from 'node:perf_hooks';
import { rng } from './prng';
import {
	DERIVED_FIELDS,
	reconcile,
	referenceScore,
	zFromRaw,
	type FieldValues,
	type NormDef,
	type ReconcileInput,
	type TestDef
} from '../../src/lib/scoring';

function arg(name: string, fallback: string): string {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
}

const PROTOCOLS = Number(arg('protocols', '10000'));
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
const NORMS: NormDef[] = TESTS.flatMap((t, i) =>
	GROUPS.map((g, gi) => ({ test: t.id, group: g, mean: 30 + i * 2 - gi * 1.5, sd: 5 + (i % 5) + gi * 0.3 }))
);

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

function median(xs: number[]): number {
	const s = [...xs].sort((a, b) => a - b);
	return s[Math.floor(s.length / 2)];
}

const batch = Array.from({ length: PROTOCOLS }, makeProtocol);
const text = JSON.stringify(batch);
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

const engine = median(engineMs);
const floor = median(floorMs);
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
	node: process.version
};

console.log(`reconcile benchmark: ${PROTOCOLS} protocols × ${TESTS_PER_PROTOCOL} tests, ${(text.length / 1e6).toFixed(1)} MB of JSON, median of ${RUNS} runs`);
console.log(`  ${fields} fields compared, ${discrepancies} discrepancies (${(100 * result.discrepancy_rate).toFixed(1)} %)`);
console.log(`  engine alone:               ${result.engine_ms} ms  (${result.engine_protocols_per_s} protocols/s)`);
console.log(`  JSON.parse + JSON.stringify: ${result.floor_ms} ms  (${result.floor_protocols_per_s} protocols/s)`);
console.log(`  ratio engine / floor:        ${result.ratio}  (goal ≤ ${result.goal_ratio}: ${result.ratio <= 3 ? 'met' : 'NOT met'})`);
if (sink < 0) console.log(sink);
const line = JSON.stringify(result);
console.log(`BENCH_JSON ${line}`);
mkdirSync(dirname(OUT), { recursive: true });
writeFileSync(OUT, line + '\n');

import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
	DERIVED_FIELDS,
	reconcile,
	referenceScore,
	zFromRaw,
	type Discrepancy,
	type Entered,
	type FieldValues,
	type ReconcileInput,
	type TestDef
} from '../../src/lib/scoring';

/** A random test with two norm groups, a raw score in range, and the references for both passes. */
const protocolArb = fc
	.record({
		direction: fc.constantFrom('higher_better' as const, 'lower_better' as const),
		mean: fc.integer({ min: 5, max: 80 }),
		sd: fc.integer({ min: 10, max: 150 }).map((x) => x / 10),
		mean2: fc.integer({ min: 5, max: 80 }),
		rawTenths: fc.integer({ min: 0, max: 1000 }),
		reported: fc.subarray([...DERIVED_FIELDS], { minLength: 1 })
	})
	.map((p) => {
		const test: TestDef = { id: 't1', direction: p.direction, raw: { min: 0, max: 100, decimals: 1 }, reported: p.reported };
		const raw = p.rawTenths / 10;
		const z = zFromRaw(raw, p.mean, p.sd, p.direction);
		const refs: FieldValues = { raw };
		for (const f of DERIVED_FIELDS) refs[f] = referenceScore(f, z);
		return {
			test,
			raw,
			refs,
			norms: [
				{ test: 't1', group: 'g', mean: p.mean, sd: p.sd },
				{ test: 't1', group: 'h', mean: p.mean2, sd: p.sd }
			]
		};
	});

/** Plausible entries: the reference (as number or string), a slip of it, empty, or anything. */
function entryArb(ref: number): fc.Arbitrary<Entered> {
	return fc.oneof(
		fc.constant(ref),
		fc.constant(String(ref)),
		fc.constant(Number.isInteger(ref) ? String(ref) : ref.toFixed(2)),
		fc.constant(-ref),
		fc.constant(ref * 10),
		fc.integer({ min: -1, max: 1 }).map((d) => ref + d),
		fc.constant(Number(String(Math.abs(ref)).split('').reverse().join('')) || 0),
		fc.constant(null),
		fc.constant(''),
		fc.integer({ min: -10, max: 200 })
	);
}

function passArb(refs: FieldValues): fc.Arbitrary<FieldValues> {
	return fc.record({
		raw: fc.oneof({ weight: 6, arbitrary: fc.constant(refs.raw as Entered) }, { weight: 1, arbitrary: entryArb(refs.raw as number) }),
		z: entryArb(refs.z as number),
		standard: entryArb(refs.standard as number),
		scaled: entryArb(refs.scaled as number),
		t: entryArb(refs.t as number),
		percentile: entryArb(refs.percentile as number)
	});
}

function doc(test: TestDef, norms: ReconcileInput['norms'], a: FieldValues, b: FieldValues): ReconcileInput {
	return {
		tests: [test],
		norms,
		protocol: { group: 'g' },
		passes: [
			{ scorer: 'a', scores: { t1: a } },
			{ scorer: 'b', scores: { t1: b } }
		]
	};
}

describe('properties of the reconciler (fast-check)', () => {
	it('a value equal to its reference is never flagged: a pass holding every reference is never named (fast-check)', () => {
		fc.assert(
			fc.property(
				protocolArb.chain((p) => fc.tuple(fc.constant(p), passArb(p.refs))),
				([p, other]) => {
					const otherWithSameRaw = { ...other, raw: p.refs.raw };
					const r = reconcile(doc(p.test, p.norms, p.refs, otherWithSameRaw));
					for (const d of r.discrepancies) expect(d.pass, JSON.stringify(d)).toBe('second');
					const r2 = reconcile(doc(p.test, p.norms, p.refs, p.refs));
					expect(r2.discrepancies).toEqual([]);
				}
			),
			{ numRuns: 500 }
		);
	});

	it('swapping the two passes swaps first and second and nothing else (fast-check)', () => {
		const swapPass = (d: Discrepancy): Discrepancy =>
			d.pass === 'both'
				? { ...d, value: d.other, other: d.value } // for "both", value is by definition the first pass's
				: { ...d, pass: d.pass === 'first' ? 'second' : 'first' };
		const key = (d: Discrepancy) => JSON.stringify([d.field, d.pass, d.kind, d.value, d.other, d.expected, d.out_of_range]);
		fc.assert(
			fc.property(
				protocolArb.chain((p) => fc.tuple(fc.constant(p), passArb(p.refs), passArb(p.refs))),
				([p, a, b]) => {
					const r = reconcile(doc(p.test, p.norms, a, b));
					const s = reconcile(doc(p.test, p.norms, b, a));
					expect(s.summary).toEqual(r.summary);
					expect(s.discrepancies.map(swapPass).map(key).sort()).toEqual(r.discrepancies.map(key).sort());
				}
			),
			{ numRuns: 1000 }
		);
	});

	it('every discrepancy carries a boolean out_of_range and a known pass; summary counts match (fast-check)', () => {
		fc.assert(
			fc.property(
				protocolArb.chain((p) => fc.tuple(fc.constant(p), passArb(p.refs), passArb(p.refs))),
				([p, a, b]) => {
					const r = reconcile(doc(p.test, p.norms, a, b));
					expect(r.summary.discrepancies).toBe(r.discrepancies.length);
					expect(r.summary.fields_compared).toBe(2 * (1 + p.test.reported.length));
					for (const d of r.discrepancies) {
						expect(typeof d.out_of_range).toBe('boolean');
						expect(['first', 'second', 'both']).toContain(d.pass);
						if (d.field === 'raw') expect(d.expected).toBeNull();
					}
				}
			),
			{ numRuns: 500 }
		);
	});
});

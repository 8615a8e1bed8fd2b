/**
 * The reconciler: compares two scoring passes of one protocol with each other and with the
 * recomputation from each pass's own raw score, and names the likely kind of each discrepancy.
 * The contract is shared/spec/reconcile.md; the choices where it left room are in ./README.md.
 */
import {
	DERIVED_FIELDS,
	boundsFor,
	ceilTo,
	floorTo,
	formatReference,
	inBounds,
	parseEntered,
	rawInRange,
	referenceScore,
	roundTo,
	SCALES,
	unroundedScore,
	writtenForm,
	zFromRaw,
	type BoundsOverride,
	type DerivedField,
	type Direction,
	type Entered,
	type Field
} from './scales';
import { isDigitDrop, isDigitExtra, isTransposition, isWrongDigit } from './digits';
import { KIND_RANK, type Kind } from './kinds';
import { isCompositeNorm, type AnyNormEntry, type CompositeDef, type CompositeField, type Covariates, type MeanSdNorm, type NormEntry } from './norms';

export type { Kind } from './kinds';

export interface RawSpec {
	min: number;
	max: number;
	decimals: number;
}

export interface TestDef {
	id: string;
	direction: Direction;
	raw: RawSpec;
	/** The derived fields this test reports; only those are compared. */
	reported: readonly DerivedField[];
	bounds?: BoundsOverride | null;
}

/** A mean/SD norm (the original form; `form` absent or `"mean_sd"`). See ./norms for all forms. */
export type NormDef = MeanSdNorm;

export type FieldValues = Partial<Record<Field, Entered>>;

export interface PassInput {
	scorer: string;
	scores: Record<string, FieldValues | undefined>;
}

export interface ProtocolInput {
	/** The norm group used for every test … */
	group: string;
	/** … unless a test or composite has its own here (test or composite id → group). */
	groups?: Readonly<Record<string, string>> | null;
	/** Covariate values for regression norms (e.g. `{ age: 46, education: 14 }`). */
	covariates?: Covariates | null;
}

export interface ReconcileInput {
	tests: readonly TestDef[];
	/** Test norms (any form) and composite norms, side by side. */
	norms: readonly AnyNormEntry[];
	/** Composites over the tests, in output order. */
	composites?: readonly CompositeDef[] | null;
	protocol: ProtocolInput;
	passes: readonly [PassInput, PassInput] | readonly PassInput[];
}

export type PassName = 'first' | 'second' | 'both';

/**
 * A reference value: a number, or (percentile-only tables) a percentile band as the table writes it
 * (`"10-25"`, `"<=5"`, `">=75"`).
 */
export type Reference = number | string;

interface DiscrepancyBase {
	pass: PassName;
	kind: Kind;
	/** The flagged pass's value as entered (the first pass's for `both`); null when empty. */
	value: number | string | null;
	/** The other pass's value for the same field, or null. */
	other: number | string | null;
	/** The recomputed reference, or null (raw fields; passes without a usable raw score). */
	expected: Reference | null;
	/**
	 * Rule 5: when the two raw scores differ and both are usable, the reference computed from the
	 * other pass's raw score (for `both`, the first pass's); otherwise null. Always null on composites.
	 */
	alternative: Reference | null;
	out_of_range: boolean;
}

/** A discrepancy on a test's field. */
export interface TestDiscrepancy extends DiscrepancyBase {
	test: string;
	composite?: undefined;
	field: Field;
}

/** A discrepancy on a composite's field (these come after all the tests' discrepancies). */
export interface CompositeDiscrepancy extends DiscrepancyBase {
	composite: string;
	test?: undefined;
	field: CompositeField;
}

export type Discrepancy = TestDiscrepancy | CompositeDiscrepancy;

export interface ReconcileResult {
	discrepancies: Discrepancy[];
	summary: { fields_compared: number; discrepancies: number };
}

export class ReconcileInputError extends Error {
	constructor(
		message: string,
		readonly path: (string | number)[]
	) {
		super(message);
		this.name = 'ReconcileInputError';
	}
}

const EPS = 1e-6;
const SHIFTS = [0.01, 0.1, 10, 100];

function eq(a: number, b: number): boolean {
	const d = a - b;
	return d <= EPS && d >= -EPS;
}

function shown(v: Entered, parsed: number | null): number | string | null {
	return parsed === null ? null : (v as number | string);
}

/** Everything the kind rules need about one pass on one test. */
interface PassCtx {
	test: TestDef;
	/** Unrounded z from this pass's raw score (null when the raw score is missing or out of range). */
	z: number | null;
	/** This pass's raw score as a number (may be out of range; null if empty or unreadable). */
	raw: number | null;
	/** The other norm groups of this test (for wrong_norm_group). */
	otherNorms: readonly NormDef[];
}

function derivedOutOfRange(field: DerivedField, p: number | null, bounds: BoundsOverride | null | undefined): boolean {
	return p !== null && (Number.isNaN(p) || !inBounds(field, p, bounds));
}

/**
 * Kind of a derived value `v` (parsed `p`) that differs from its reference `r`, by the spec's order.
 * Precondition: ctx.z is not null, p is not within 1e-6 of r.
 */
export function classifyDerived(field: DerivedField, v: Entered, p: number | null, r: number, ctx: PassCtx, alt: number | null = null): Kind {
	if (p === null) return 'missing';
	if (Number.isNaN(p)) return 'mismatch';
	// follows_other_raw: right for the other pass's raw score (rule 5)
	if (alt !== null && eq(p, alt)) return 'follows_other_raw';
	const { test } = ctx;
	const z = ctx.z as number;
	const bounds = test.bounds;
	// sign_flip: the reference with the direction reversed
	if (eq(p, referenceScore(field, -z, bounds))) return 'sign_flip';
	// wrong_norm_group: the reference from another group of the same test
	if (ctx.raw !== null) {
		for (const n of ctx.otherNorms) {
			if (eq(p, referenceScore(field, zFromRaw(ctx.raw, n.mean, n.sd, test.direction), bounds))) return 'wrong_norm_group';
		}
	}
	// wrong_scale: this pass's reference on another scale
	for (const f of DERIVED_FIELDS) {
		if (f !== field && eq(p, referenceScore(f, z, bounds))) return 'wrong_scale';
	}
	if (ctx.raw !== null && eq(p, ctx.raw)) return 'raw_as_derived';
	for (const k of SHIFTS) if (eq(p, r * k)) return 'decimal_shift';
	const sv = writtenForm(v);
	const sr = formatReference(field, r);
	if (isTransposition(sv, sr)) return 'transposition';
	// rounding: floor or ceiling of the unrounded reference at the field's precision; for z also R to 1 decimal
	const u = unroundedScore(field, z);
	const d = SCALES[field].decimals;
	if (eq(p, floorTo(u, d)) || eq(p, ceilTo(u, d)) || (field === 'z' && eq(p, roundTo(u, 1)))) return 'rounding';
	if (isDigitDrop(sv, sr)) return 'digit_drop';
	if (isDigitExtra(sv, sr)) return 'digit_extra';
	if (isWrongDigit(sv, sr)) return 'wrong_digit';
	if (!inBounds(field, p, bounds)) return 'out_of_range';
	return 'mismatch';
}

/**
 * Kind for two values compared with each other only (raw pairs, and derived values of a pass with no
 * usable raw score). Symmetric in its two sides by construction, so swapping the passes never changes
 * the kind. `ownRaw` (derived only): each side's own raw score, for raw_as_derived.
 */
export function classifyPair(
	a: Entered,
	pa: number | null,
	b: Entered,
	pb: number | null,
	outOfRange: boolean,
	ownRaw?: readonly [number | null, number | null]
): Kind {
	if (pa === null || pb === null) return 'missing';
	const numeric = !Number.isNaN(pa) && !Number.isNaN(pb);
	if (ownRaw && numeric) {
		if ((ownRaw[0] !== null && eq(pa, ownRaw[0])) || (ownRaw[1] !== null && eq(pb, ownRaw[1]))) return 'raw_as_derived';
	}
	if (numeric) for (const k of SHIFTS) if (eq(pa, pb * k)) return 'decimal_shift';
	const sa = writtenForm(a);
	const sb = writtenForm(b);
	if (isTransposition(sa, sb)) return 'transposition';
	if (isDigitDrop(sa, sb) || isDigitDrop(sb, sa)) return 'digit_drop';
	if (isWrongDigit(sa, sb)) return 'wrong_digit';
	if (outOfRange) return 'out_of_range';
	return 'mismatch';
}

function indexNorms(norms: readonly AnyNormEntry[]): Map<string, NormDef[]> {
	const byTest = new Map<string, NormDef[]>();
	for (const n of norms) {
		if (isCompositeNorm(n)) continue;
		if (n.form !== undefined && n.form !== 'mean_sd') {
			throw new ReconcileInputError(`norm form ${JSON.stringify(n.form)} is not handled by this version of the engine`, ['norms']);
		}
		const list = byTest.get(n.test);
		if (list) list.push(n);
		else byTest.set(n.test, [n]);
	}
	return byTest;
}

const EMPTY: FieldValues = {};

/**
 * The references of one test for a given raw score, through the given norm (any form; regression
 * norms need the protocol's covariates): every derived field the norm yields, which is all five for
 * mean/SD, regression and score tables, and `percentile` alone for percentile-only tables (a number
 * or a band string). The review screen re-judges a test's derived discrepancies against the kept raw
 * score with this. Returns null when the raw score is empty, not a number, or outside the test's
 * range (no reference, as in rule 3). Pure; the same computation `reconcile` uses.
 */
export function testReferences(
	test: TestDef,
	norm: NormEntry,
	raw: Entered,
	covariates?: Covariates | null
): Partial<Record<DerivedField, Reference>> | null {
	const n = parseEntered(raw, 'raw');
	if (n === null || Number.isNaN(n) || !rawInRange(n, test.raw)) return null;
	if (norm.form !== undefined && norm.form !== 'mean_sd') {
		void covariates;
		throw new ReconcileInputError(`norm form ${JSON.stringify(norm.form)} is not handled by this version of the engine`, ['norms']);
	}
	const z = zFromRaw(n, norm.mean, norm.sd, test.direction);
	const out: Partial<Record<DerivedField, Reference>> = {};
	for (const f of DERIVED_FIELDS) out[f] = referenceScore(f, z, test.bounds);
	return out;
}

/**
 * Reconcile one protocol. Throws ReconcileInputError when a test has no norms for its group or there
 * are not exactly two passes; validate batch input with `parseReconcileInput` (./schema) first.
 */
export function reconcile(input: ReconcileInput): ReconcileResult {
	if (input.passes.length !== 2) throw new ReconcileInputError('expected exactly two passes', ['passes']);
	const [first, second] = input.passes;
	const normsByTest = indexNorms(input.norms);
	const out: Discrepancy[] = [];
	let fieldsCompared = 0;

	for (let ti = 0; ti < input.tests.length; ti++) {
		const test = input.tests[ti];
		const groupId = input.protocol.groups?.[test.id] ?? input.protocol.group;
		const all = normsByTest.get(test.id) ?? [];
		let norm: NormDef | undefined;
		for (const n of all) if (n.group === groupId) norm = n;
		if (!norm) {
			throw new ReconcileInputError(`no norms for test ${JSON.stringify(test.id)} in group ${JSON.stringify(groupId)}`, [
				'protocol',
				'group'
			]);
		}
		const s1 = first.scores[test.id] ?? EMPTY;
		const s2 = second.scores[test.id] ?? EMPTY;
		const reported = test.reported;
		fieldsCompared += 2 * (1 + reported.length);

		// ---- raw pair
		const v1 = s1.raw;
		const v2 = s2.raw;
		const n1 = parseEntered(v1, 'raw');
		const n2 = parseEntered(v2, 'raw');
		const ok1 = n1 !== null && !Number.isNaN(n1) && rawInRange(n1, test.raw);
		const ok2 = n2 !== null && !Number.isNaN(n2) && rawInRange(n2, test.raw);
		const rawSame =
			n1 !== null && n2 !== null && (Number.isNaN(n1) || Number.isNaN(n2) ? writtenForm(v1) === writtenForm(v2) : eq(n1, n2));
		if (n1 === null && n2 === null) {
			out.push({ test: test.id, field: 'raw', pass: 'both', kind: 'missing', value: null, other: null, expected: null, alternative: null, out_of_range: false });
		} else if (rawSame) {
			if (!ok1) {
				out.push({ test: test.id, field: 'raw', pass: 'both', kind: 'out_of_range', value: v1 as number | string, other: v2 as number | string, expected: null, alternative: null, out_of_range: true });
			}
		} else {
			const oor1 = n1 !== null && !ok1;
			const oor2 = n2 !== null && !ok2;
			const pass: PassName = ok1 !== ok2 ? (ok1 ? 'second' : 'first') : 'both';
			const flaggedOor = pass === 'first' ? oor1 : pass === 'second' ? oor2 : oor1 || oor2;
			const [fv, fn, ov, on] = pass === 'second' ? [v2, n2, v1, n1] : [v1, n1, v2, n2];
			out.push({
				test: test.id,
				field: 'raw',
				pass,
				kind: classifyPair(fv, fn, ov, on, flaggedOor),
				value: shown(fv, fn),
				other: shown(ov, on),
				expected: null,
				alternative: null,
				out_of_range: flaggedOor
			});
		}
		if (reported.length === 0) continue;

		// ---- derived fields
		const dir = test.direction;
		const z1 = ok1 ? zFromRaw(n1 as number, norm.mean, norm.sd, dir) : null;
		const z2 = ok2 ? (ok1 && rawSame ? z1 : zFromRaw(n2 as number, norm.mean, norm.sd, dir)) : null;
		const sameRef = z1 !== null && z2 !== null && z1 === z2;
		const bounds = test.bounds;
		let ctx1: PassCtx | undefined;
		let ctx2: PassCtx | undefined;
		const otherNorms = (): NormDef[] => all.filter((n) => n !== norm);
		const c1 = (): PassCtx => (ctx1 ??= { test, z: z1, raw: n1 !== null && !Number.isNaN(n1) ? n1 : null, otherNorms: otherNorms() });
		const c2 = (): PassCtx => (ctx2 ??= { test, z: z2, raw: n2 !== null && !Number.isNaN(n2) ? n2 : null, otherNorms: ctx1?.otherNorms ?? otherNorms() });

		for (const field of DERIVED_FIELDS) {
			if (!reported.includes(field)) continue;
			const a1 = s1[field];
			const a2 = s2[field];
			const p1 = parseEntered(a1, field);
			const p2 = parseEntered(a2, field);

			if (sameRef) {
				// fast path: both passes share one reference; most fields agree with it
				const r = referenceScore(field, z1 as number, bounds);
				const e1 = p1 !== null && eq(p1, r);
				const e2 = p2 !== null && eq(p2, r);
				if (e1 && e2) continue;
				if (!e1 && !e2 && p1 !== null && p2 !== null && !Number.isNaN(p1) && !Number.isNaN(p2) && eq(p1, p2)) {
					// the shared error double entry alone would miss; the kind is the earlier of the two writings'
					const k1 = classifyDerived(field, a1, p1, r, c1());
					const k2 = classifyDerived(field, a2, p2, r, c2());
					out.push({
						test: test.id,
						field,
						pass: 'both',
						kind: KIND_RANK[k2] < KIND_RANK[k1] ? k2 : k1,
						value: a1 as number | string,
						other: a2 as number | string,
						expected: r,
						alternative: null,
						out_of_range: derivedOutOfRange(field, p1, bounds)
					});
					continue;
				}
				if (!e1) out.push(derived(test.id, field, 'first', a1, p1, a2, p2, r, null, c1(), bounds));
				if (!e2) out.push(derived(test.id, field, 'second', a2, p2, a1, p1, r, null, c2(), bounds));
				continue;
			}

			// general path: different references, or a pass without a usable raw score
			const r1 = z1 !== null ? referenceScore(field, z1, bounds) : null;
			const r2 = z2 !== null ? referenceScore(field, z2, bounds) : null;
			const e1 = r1 !== null && p1 !== null && eq(p1, r1);
			const e2 = r2 !== null && p2 !== null && eq(p2, r2);
			if (
				r1 !== null && r2 !== null && eq(r1, r2) && !e1 && !e2 && p1 !== null && p2 !== null &&
				!Number.isNaN(p1) && !Number.isNaN(p2) && eq(p1, p2)
			) {
				// both references exist here, so the raw scores differ and both are usable: rule 5's alternatives
				const k1 = classifyDerived(field, a1, p1, r1, c1(), r2);
				const k2 = classifyDerived(field, a2, p2, r2, c2(), r1);
				out.push({ test: test.id, field, pass: 'both', kind: KIND_RANK[k2] < KIND_RANK[k1] ? k2 : k1, value: a1 as number | string, other: a2 as number | string, expected: r1, alternative: r2, out_of_range: derivedOutOfRange(field, p1, bounds) });
				continue;
			}
			const peersDiffer =
				(r1 === null || r2 === null) &&
				(p1 === null || p2 === null
					? p1 !== p2
					: Number.isNaN(p1) || Number.isNaN(p2)
						? writtenForm(a1) !== writtenForm(a2)
						: !eq(p1, p2));
			const peer = (): Discrepancy => {
				const oor = derivedOutOfRange(field, p1, bounds) || derivedOutOfRange(field, p2, bounds);
				return {
					test: test.id,
					field,
					pass: 'both',
					kind: classifyPair(a1, p1, a2, p2, oor, [c1().raw, c2().raw]),
					value: shown(a1, p1),
					other: shown(a2, p2),
					expected: null,
					alternative: null,
					out_of_range: oor
				};
			};
			// first pass's slot
			if (r1 !== null) {
				if (!e1) out.push(derived(test.id, field, 'first', a1, p1, a2, p2, r1, r2, c1(), bounds));
			} else if (peersDiffer) {
				out.push(peer());
			}
			// second pass's slot (when neither has a reference, the one peer comparison is already made)
			if (r2 !== null) {
				if (!e2) out.push(derived(test.id, field, 'second', a2, p2, a1, p1, r2, r1, c2(), bounds));
			} else if (peersDiffer && r1 !== null) {
				out.push(peer());
			}
		}
	}
	return { discrepancies: out, summary: { fields_compared: fieldsCompared, discrepancies: out.length } };
}

function derived(
	test: string,
	field: DerivedField,
	pass: 'first' | 'second',
	v: Entered,
	p: number | null,
	o: Entered,
	po: number | null,
	r: number,
	alt: number | null,
	ctx: PassCtx,
	bounds: BoundsOverride | null | undefined
): Discrepancy {
	return {
		test,
		field,
		pass,
		kind: classifyDerived(field, v, p, r, ctx, alt),
		value: shown(v, p),
		other: shown(o, po),
		expected: r,
		alternative: alt,
		out_of_range: derivedOutOfRange(field, p, bounds)
	};
}

// ---------------------------------------------------------------- live field checks

export type FieldProblemCode = 'not_a_number' | 'out_of_range' | 'too_many_decimals';

export interface FieldProblem {
	code: FieldProblemCode;
	message: string;
}

/**
 * Checks on one field while it is being typed, using only the test's definition — never norms or the
 * other pass, so it cannot reveal the recomputed reference (blindness). Empty is not a problem here.
 * Decimals: raw at most `raw.decimals`, z at most 2, the other scales whole numbers; trailing zeros
 * do not count (36.20 has one decimal).
 */
export function checkField(test: Pick<TestDef, 'raw' | 'bounds'>, field: Field, value: Entered): FieldProblem[] {
	const p = parseEntered(value, field);
	if (p === null) return [];
	if (Number.isNaN(p)) {
		return [{ code: 'not_a_number', message: field === 'percentile' ? 'Enter a number (or <1, >99).' : 'Enter a number written in digits.' }];
	}
	const problems: FieldProblem[] = [];
	const written = writtenForm(value);
	const dot = written.indexOf('.');
	const decimals = dot < 0 ? 0 : written.slice(dot + 1).replace(/0+$/, '').length;
	if (field === 'raw') {
		const { min, max, decimals: allowed } = test.raw;
		if (p < min || p > max) problems.push({ code: 'out_of_range', message: `Raw scores on this test run from ${min} to ${max}.` });
		if (decimals > allowed) {
			problems.push({
				code: 'too_many_decimals',
				message: allowed === 0 ? 'Raw scores on this test are whole numbers.' : `Raw scores on this test have at most ${allowed} decimal${allowed === 1 ? '' : 's'}.`
			});
		}
		return problems;
	}
	if (!inBounds(field, p, test.bounds)) {
		const [lo, hi] = boundsFor(field, test.bounds);
		problems.push({
			code: 'out_of_range',
			message:
				field === 'percentile' && !test.bounds?.percentile
					? 'A percentile lies above 0 and below 100 (write <1 or >99 for the extremes).'
					: `A ${SCALES[field].label} on this test lies between ${lo} and ${hi}.`
		});
	}
	const allowed = SCALES[field].decimals;
	if (decimals > allowed) {
		problems.push({
			code: 'too_many_decimals',
			message: allowed === 0 ? `A ${SCALES[field].label} is a whole number.` : `A ${SCALES[field].label} has at most ${allowed} decimals.`
		});
	}
	return problems;
}

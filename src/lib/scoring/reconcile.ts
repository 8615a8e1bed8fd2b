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
	hasDecimalComma,
	notANumberMessage,
	parseEntered,
	rawInRange,
	roundTo,
	SCALES,
	writtenForm,
	type BoundsOverride,
	type DerivedField,
	type Direction,
	type Entered,
	type Field
} from './scales';
import { isDigitDrop, isDigitExtra, isTransposition, isWrongDigit } from './digits';
import { KIND_RANK, type Kind } from './kinds';
import {
	COMPOSITE_FIELDS,
	isCompositeNorm,
	type AnyNormEntry,
	type CompositeDef,
	type CompositeField,
	type CompositeNormEntry,
	type Covariates,
	type MeanSdNorm,
	type NormEntry
} from './norms';
import { canonicalBand, compositeScorer, MissingCovariate, testScorer, type Point, type Scorer } from './forms';

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

/** One test's (or composite's) values in a pass: raw and derived fields for a test, `sum` and derived fields for a composite. */
export type FieldValues = Partial<Record<Field | 'sum', Entered>>;

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

// ---------------------------------------------------------------- entered values

/** An entered value as read: its number (NaN when unreadable, null when empty) or its band. */
interface Val {
	v: Entered;
	p: number | null;
	/** Canonical percentile band, on percentile-only fields only. */
	band: string | null;
}

function readVal(v: Entered, field: DerivedField | 'sum' | 'raw', bands: boolean): Val {
	if (bands && typeof v === 'string') {
		const band = canonicalBand(v);
		if (band !== null) return { v, p: NaN, band };
	}
	return { v, p: parseEntered(v, field === 'sum' ? 'raw' : field), band: null };
}

/** Whether an entered value equals a reference (numbers within 1e-6; a band names the same band). */
function same(x: Val, r: Reference): boolean {
	if (typeof r === 'string') return x.band !== null && x.band === (canonicalBand(r) ?? r);
	return x.band === null && x.p !== null && eq(x.p, r);
}

/** Whether two references are the same value. */
function refEq(a: Reference, b: Reference): boolean {
	if (typeof a === 'number' && typeof b === 'number') return eq(a, b);
	if (typeof a === 'string' && typeof b === 'string') return (canonicalBand(a) ?? a) === (canonicalBand(b) ?? b);
	return false;
}

/** Whether two entered values hold the same, readable value (the shared-error test). */
function sameReadable(a: Val, b: Val): boolean {
	if (a.band !== null || b.band !== null) return a.band === b.band;
	return a.p !== null && b.p !== null && !Number.isNaN(a.p) && !Number.isNaN(b.p) && eq(a.p, b.p);
}

/** Whether two entered values differ (peer comparison): empty vs filled, different numbers, bands or texts. */
function peersDiffer(a: Val, b: Val): boolean {
	if (a.p === null || b.p === null) return a.p !== b.p;
	if (a.band !== null || b.band !== null) return a.band !== b.band;
	if (Number.isNaN(a.p) || Number.isNaN(b.p)) return writtenForm(a.v) !== writtenForm(b.v);
	return !eq(a.p, b.p);
}

function shown(x: Val): number | string | null {
	return x.p === null ? null : (x.v as number | string);
}

// ---------------------------------------------------------------- kinds

/**
 * What the kind rules need about one pass's value on one field against its reference. Candidates
 * are functions so that they are only worked out on a mismatch (the agreeing path never needs them).
 */
export interface Judgement {
	field: DerivedField | 'sum';
	/** The reference (from this pass's own raw score or parts). */
	r: Reference;
	/** The unrounded reference, or null (read from a table; composite sums). */
	u: number | null;
	/** Rule 5: the reference from the other pass's raw score, or null. */
	alt: Reference | null;
	/** This pass's own raw score (raw_as_derived), null for composites. */
	ownRaw: number | null;
	/** Percentile-only field: only missing, follows_other_raw, (carried), wrong_norm_group, adjacent_row, mismatch. */
	restricted: boolean;
	/** Composite `sum`: the sum of this pass's entered parts when all are present, else null. */
	ownPartsSum?: number | null;
	/** Composite derived field: the reference computed from this pass's own sum s (when carried can apply). */
	carried?: () => Reference | undefined;
	flipped: () => Reference | undefined;
	otherGroups: () => (Reference | undefined)[];
	adjacent: () => Reference[];
	otherScales: () => (Reference | undefined)[];
	outOfRange: (x: Val) => boolean;
}

/** Kind of a value that differs from its reference, by the contract's order (the first that applies wins). */
export function classify(x: Val, j: Judgement): Kind {
	if (x.p === null) return 'missing';
	if (Number.isNaN(x.p) && x.band === null) return 'mismatch';
	if (j.alt !== null && same(x, j.alt)) return 'follows_other_raw';
	if (j.field === 'sum') {
		if (j.ownPartsSum != null) return same(x, j.ownPartsSum) ? 'carried' : 'sum_error';
	} else if (j.carried) {
		const c = j.carried();
		if (c !== undefined && same(x, c)) return 'carried';
	}
	const flipped = j.flipped();
	if (flipped !== undefined && same(x, flipped)) return 'sign_flip';
	for (const g of j.otherGroups()) if (g !== undefined && same(x, g)) return 'wrong_norm_group';
	for (const a of j.adjacent()) if (same(x, a)) return 'adjacent_row';
	if (j.restricted || x.band !== null) return 'mismatch';
	const p = x.p;
	for (const o of j.otherScales()) if (o !== undefined && same(x, o)) return 'wrong_scale';
	if (j.ownRaw !== null && eq(p, j.ownRaw)) return 'raw_as_derived';
	const r = j.r as number;
	for (const k of SHIFTS) if (eq(p, r * k)) return 'decimal_shift';
	const sv = writtenForm(x.v);
	const sr = formatReference(j.field, r);
	if (isTransposition(sv, sr)) return 'transposition';
	if (j.u !== null) {
		const d = j.field === 'sum' ? 0 : SCALES[j.field].decimals;
		if (eq(p, floorTo(j.u, d)) || eq(p, ceilTo(j.u, d)) || (j.field === 'z' && eq(p, roundTo(j.u, 1)))) return 'rounding';
	}
	if (isDigitDrop(sv, sr)) return 'digit_drop';
	if (isDigitExtra(sv, sr)) return 'digit_extra';
	if (isWrongDigit(sv, sr)) return 'wrong_digit';
	if (j.outOfRange(x)) return 'out_of_range';
	return 'mismatch';
}

/**
 * Kind for two values compared with each other only (raw pairs, and derived values of a pass with no
 * usable raw score). Symmetric in its two sides by construction, so swapping the passes never changes
 * the kind. `ownRaw` (derived only): each side's own raw score, for raw_as_derived. `restricted`:
 * percentile-only fields, where only missing and mismatch can apply without a reference.
 */
export function classifyPair(
	a: Entered,
	pa: number | null,
	b: Entered,
	pb: number | null,
	outOfRange: boolean,
	ownRaw?: readonly [number | null, number | null],
	restricted = false
): Kind {
	if (pa === null || pb === null) return 'missing';
	if (restricted) return 'mismatch';
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

// ---------------------------------------------------------------- one field of two passes

interface Subject {
	test?: string;
	composite?: string;
}

function mk(
	subj: Subject,
	field: Field | CompositeField,
	pass: PassName,
	kind: Kind,
	value: number | string | null,
	other: number | string | null,
	expected: Reference | null,
	alternative: Reference | null,
	oor: boolean
): Discrepancy {
	if (subj.composite !== undefined) {
		return { composite: subj.composite, field: field as CompositeField, pass, kind, value, other, expected, alternative, out_of_range: oor };
	}
	return { test: subj.test as string, field: field as Field, pass, kind, value, other, expected, alternative, out_of_range: oor };
}

/**
 * Compare one field of the two passes (rules 2–5): each pass against its own reference (null when it
 * has none), the shared error as one `both`, and passes without a reference against each other.
 */
function compareField(
	out: Discrepancy[],
	subj: Subject,
	field: DerivedField | 'sum',
	x1: Val,
	x2: Val,
	r1: Reference | null,
	r2: Reference | null,
	/** Rule 5 alternatives (null unless the raw scores differ and both are usable). */
	alt1: Reference | null,
	alt2: Reference | null,
	j1: (r: Reference, alt: Reference | null) => Judgement,
	j2: (r: Reference, alt: Reference | null) => Judgement,
	oor: (x: Val) => boolean,
	pair: { ownRaw?: readonly [number | null, number | null]; restricted: boolean }
): void {
	const e1 = r1 !== null && same(x1, r1);
	const e2 = r2 !== null && same(x2, r2);
	if (e1 && e2) return;
	if (r1 !== null && r2 !== null && !e1 && !e2 && refEq(r1, r2) && sameReadable(x1, x2)) {
		// the shared error double entry alone would miss; the kind is the earlier of the two writings'
		const k1 = classify(x1, j1(r1, alt1));
		const k2 = classify(x2, j2(r2, alt2));
		out.push(mk(subj, field, 'both', KIND_RANK[k2] < KIND_RANK[k1] ? k2 : k1, shown(x1), shown(x2), r1, alt1, oor(x1)));
		return;
	}
	const differ = (r1 === null || r2 === null) && peersDiffer(x1, x2);
	const peer = (): Discrepancy => {
		const o = oor(x1) || oor(x2);
		return mk(subj, field, 'both', classifyPair(x1.v, x1.p, x2.v, x2.p, o, pair.ownRaw, pair.restricted), shown(x1), shown(x2), null, null, o);
	};
	// first pass's slot
	if (r1 !== null) {
		if (!e1) out.push(mk(subj, field, 'first', classify(x1, j1(r1, alt1)), shown(x1), shown(x2), r1, alt1, oor(x1)));
	} else if (differ) out.push(peer());
	// second pass's slot (when neither has a reference, the one peer comparison is already made)
	if (r2 !== null) {
		if (!e2) out.push(mk(subj, field, 'second', classify(x2, j2(r2, alt2)), shown(x2), shown(x1), r2, alt2, oor(x2)));
	} else if (differ && r1 !== null) out.push(peer());
}

// ---------------------------------------------------------------- norms

/** The scorer of a test's norm; a missing covariate becomes a ReconcileInputError naming the norm. */
function makeTestScorer(test: TestDef, norm: NormEntry, covariates: Covariates | null | undefined, norms: readonly AnyNormEntry[] | null): Scorer {
	try {
		return testScorer(test, norm, covariates);
	} catch (e) {
		if (e instanceof MissingCovariate) {
			const i = norms ? norms.indexOf(norm) : -1;
			throw new ReconcileInputError(e.message, i >= 0 ? ['norms', i, 'coefficients', e.covariate] : ['protocol', 'covariates', e.covariate]);
		}
		throw e;
	}
}

const EMPTY: FieldValues = {};

/** Whether a test's norm (any of its groups) is a percentile-only table. */
function isPercentileOnly(norms: readonly AnyNormEntry[] | undefined): boolean {
	if (!norms) return false;
	for (const n of norms) if (n.form === 'table' && n.scale === 'percentile') return true;
	return false;
}

/**
 * The references of one test for a given raw score, through the given norm (any form; regression
 * norms need the protocol's covariates): every derived field the norm yields, which is all five for
 * mean/SD, regression and score tables, and `percentile` alone for percentile-only tables (a number
 * or a band string as the table writes it). The review screen re-judges a test's derived
 * discrepancies against the kept raw score with this. Returns null when the raw score is empty, not
 * a number, or outside the test's range (no reference, as in rule 3). Throws ReconcileInputError
 * when a regression covariate is missing. Pure; the same computation `reconcile` uses.
 */
export function testReferences(test: TestDef, norm: NormEntry, raw: Entered, covariates?: Covariates | null): Partial<Record<DerivedField, Reference>> | null {
	const n = parseEntered(raw, 'raw');
	if (n === null || Number.isNaN(n) || !rawInRange(n, test.raw)) return null;
	const sc = makeTestScorer(test, norm, covariates, null);
	const pt = sc.at(n);
	const out: Partial<Record<DerivedField, Reference>> = {};
	for (const f of DERIVED_FIELDS) {
		const r = sc.ref(pt, f);
		if (r !== undefined) out[f] = r;
	}
	return out;
}

/**
 * The references of a composite for a given sum through its norm: `sum` itself and every derived field
 * the norm yields. Null when the sum is not a whole number within `span` (the possible sums).
 */
export function compositeReferences(norm: CompositeNormEntry, sum: number, span: readonly [number, number]): Partial<Record<CompositeField, Reference>> | null {
	if (!Number.isInteger(sum) || sum < span[0] || sum > span[1]) return null;
	const sc = compositeScorer(norm);
	const pt = sc.at(sum);
	const out: Partial<Record<CompositeField, Reference>> = { sum };
	for (const f of DERIVED_FIELDS) {
		const r = sc.ref(pt, f);
		if (r !== undefined) out[f] = r;
	}
	return out;
}

/** The possible sums of a composite: from the sum of the parts' lower bounds to the sum of their upper bounds on part_field. */
export function compositeSpan(def: Pick<CompositeDef, 'parts' | 'part_field'>, tests: readonly Pick<TestDef, 'id' | 'bounds'>[]): [number, number] {
	let lo = 0;
	let hi = 0;
	for (const id of def.parts) {
		const t = tests.find((x) => x.id === id);
		const [a, b] = boundsFor(def.part_field, t?.bounds);
		lo += a;
		hi += b;
	}
	return [Math.ceil(lo - 1e-9), Math.floor(hi + 1e-9)];
}

/** Per test and pass, what composites need: the point (null without a usable raw score). */
interface TestState {
	test: TestDef;
	scorer: Scorer;
	pt1: Point | null;
	pt2: Point | null;
}

/** A raw pair whose values differ (rule 1). */
function rawPair(id: string, v1: Entered, n1: number | null, ok1: boolean, v2: Entered, n2: number | null, ok2: boolean): Discrepancy {
	const oor1 = n1 !== null && !ok1;
	const oor2 = n2 !== null && !ok2;
	const pass: PassName = ok1 !== ok2 ? (ok1 ? 'second' : 'first') : 'both';
	const flaggedOor = pass === 'first' ? oor1 : pass === 'second' ? oor2 : oor1 || oor2;
	const [fv, fn, ov, on] = pass === 'second' ? [v2, n2, v1, n1] : [v1, n1, v2, n2];
	return mk(
		{ test: id },
		'raw',
		pass,
		classifyPair(fv, fn, ov, on, flaggedOor),
		fn === null ? null : (fv as number | string),
		on === null ? null : (ov as number | string),
		null,
		null,
		flaggedOor
	);
}

/**
 * One test's derived fields that did not agree on the fast path: everything the kind rules need,
 * built once per test and only when needed.
 */
class TestFields {
	private readonly subj: Subject;
	private readonly pctOnly: boolean;
	private readonly rawsDiffer: boolean;
	private readonly own1: number | null;
	private readonly own2: number | null;
	private readonly pair: { ownRaw: readonly [number | null, number | null]; restricted: boolean };
	private others: { sc: Scorer; pt1: Point | null; pt2: Point | null }[] | undefined;
	private field: DerivedField = 'z';

	constructor(
		private readonly test: TestDef,
		private readonly scorer: Scorer,
		private readonly norm: NormEntry,
		private readonly all: readonly NormEntry[],
		private readonly covariates: Covariates | null | undefined,
		private readonly norms: readonly AnyNormEntry[],
		n1: number | null,
		n2: number | null,
		private readonly pt1: Point | null,
		private readonly pt2: Point | null
	) {
		this.subj = { test: test.id };
		this.pctOnly = scorer.kind === 'percentile' || isPercentileOnly(all);
		this.rawsDiffer = pt1 !== null && pt2 !== null && pt1 !== pt2;
		this.own1 = n1 !== null && !Number.isNaN(n1) ? n1 : null;
		this.own2 = n2 !== null && !Number.isNaN(n2) ? n2 : null;
		this.pair = { ownRaw: [this.own1, this.own2], restricted: this.pctOnly };
	}

	private otherGroups(): { sc: Scorer; pt1: Point | null; pt2: Point | null }[] {
		if (!this.others) {
			this.others = [];
			for (const n of this.all) {
				if (n === this.norm) continue;
				const sc = makeTestScorer(this.test, n, this.covariates, this.norms);
				const at = (raw: number | null) => (raw !== null && rawInRange(raw, this.test.raw) ? sc.at(raw) : null);
				this.others.push({ sc, pt1: this.pt1 ? at(this.own1) : null, pt2: this.pt2 ? at(this.own2) : null });
			}
		}
		return this.others;
	}

	private readonly oor = (x: Val): boolean => x.p !== null && x.band === null && (Number.isNaN(x.p) || !inBounds(this.field, x.p, this.test.bounds));

	private judgement(which: 1 | 2, r: Reference, alt: Reference | null): Judgement {
		const field = this.field;
		const pt = (which === 1 ? this.pt1 : this.pt2) as Point;
		const scorer = this.scorer;
		return {
			field,
			r,
			u: scorer.unrounded(pt, field),
			alt,
			ownRaw: which === 1 ? this.own1 : this.own2,
			restricted: this.pctOnly,
			flipped: () => scorer.flipped(pt, field),
			otherGroups: () =>
				this.otherGroups().map((o) => {
					const p = which === 1 ? o.pt1 : o.pt2;
					return p ? o.sc.ref(p, field) : undefined;
				}),
			adjacent: () => scorer.adjacent(pt, field),
			otherScales: () => DERIVED_FIELDS.filter((f) => f !== field).map((f) => scorer.ref(pt, f)),
			outOfRange: this.oor
		};
	}

	private readonly j1 = (r: Reference, alt: Reference | null) => this.judgement(1, r, alt);
	private readonly j2 = (r: Reference, alt: Reference | null) => this.judgement(2, r, alt);

	compare(out: Discrepancy[], field: DerivedField, a1: Entered, a2: Entered, r1: Reference | null): void {
		this.field = field;
		const bands = this.pctOnly && field === 'percentile';
		const x1 = readVal(a1, field, bands);
		const x2 = readVal(a2, field, bands);
		const pt2 = this.pt2;
		const r2 = pt2 ? (pt2 === this.pt1 ? r1 : (this.scorer.ref(pt2, field) ?? null)) : null;
		const d = this.rawsDiffer;
		compareField(out, this.subj, field, x1, x2, r1, r2, d ? r2 : null, d ? r1 : null, this.j1, this.j2, this.oor, this.pair);
	}
}

/**
 * Reconcile one protocol. Throws ReconcileInputError when a test or composite has no norms for its
 * group, a regression covariate is missing, or there are not exactly two passes; validate batch input
 * with `parseReconcileInput` (./schema) first, which also checks tables and composites.
 */
export function reconcile(input: ReconcileInput): ReconcileResult {
	if (input.passes.length !== 2) throw new ReconcileInputError('expected exactly two passes', ['passes']);
	const [first, second] = input.passes;
	const protocol = input.protocol;
	const covariates = protocol.covariates;
	const testNorms = new Map<string, NormEntry[]>();
	for (const n of input.norms) {
		if (isCompositeNorm(n)) continue;
		const list = testNorms.get(n.test);
		if (list) list.push(n);
		else testNorms.set(n.test, [n]);
	}
	const out: Discrepancy[] = [];
	const composites = input.composites ?? [];
	const states = composites.length > 0 ? new Map<string, TestState>() : null;
	let fieldsCompared = 0;

	for (let ti = 0; ti < input.tests.length; ti++) {
		const test = input.tests[ti];
		const groupId = protocol.groups?.[test.id] ?? protocol.group;
		const all = testNorms.get(test.id) ?? [];
		let norm: NormEntry | undefined;
		for (const n of all) if (n.group === groupId) norm = n;
		if (!norm) {
			throw new ReconcileInputError(`no norms for test ${JSON.stringify(test.id)} in group ${JSON.stringify(groupId)}`, ['protocol', 'group']);
		}
		const scorer = makeTestScorer(test, norm, covariates, input.norms);
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
		const rawSame = n1 !== null && n2 !== null && (Number.isNaN(n1) || Number.isNaN(n2) ? writtenForm(v1) === writtenForm(v2) : eq(n1, n2));
		if (n1 === null && n2 === null) {
			out.push(mk({ test: test.id }, 'raw', 'both', 'missing', null, null, null, null, false));
		} else if (rawSame) {
			if (!ok1) out.push(mk({ test: test.id }, 'raw', 'both', 'out_of_range', v1 as number | string, v2 as number | string, null, null, true));
		} else {
			out.push(rawPair(test.id, v1, n1, ok1, v2, n2, ok2));
		}

		const pt1 = ok1 ? scorer.at(n1 as number) : null;
		const pt2 = ok2 ? (ok1 && rawSame ? pt1 : scorer.at(n2 as number)) : null;
		if (states) states.set(test.id, { test, scorer, pt1, pt2 });
		if (reported.length === 0) continue;

		// ---- derived fields: a fast path for agreeing values, the rest through TestFields
		let slow: TestFields | undefined;
		for (const field of DERIVED_FIELDS) {
			if (!reported.includes(field)) continue;
			const a1 = s1[field];
			const a2 = s2[field];
			const r1 = pt1 ? (scorer.ref(pt1, field) ?? null) : null;
			if (pt2 === pt1 && typeof r1 === 'number') {
				// one reference for both passes, and (mostly) both values agree with it
				const p1 = parseEntered(a1, field);
				if (p1 !== null && eq(p1, r1)) {
					const p2 = parseEntered(a2, field);
					if (p2 !== null && eq(p2, r1)) continue;
				}
			}
			slow ??= new TestFields(test, scorer, norm, all, covariates, input.norms, n1, n2, pt1, pt2);
			slow.compare(out, field, a1, a2, r1);
		}
	}

	// ---- composites, after all the tests
	if (states) {
		const compNorms = new Map<string, CompositeNormEntry[]>();
		for (const n of input.norms) {
			if (!isCompositeNorm(n)) continue;
			const list = compNorms.get(n.composite);
			if (list) list.push(n);
			else compNorms.set(n.composite, [n]);
		}
		for (const c of composites) {
			const groupId = protocol.groups?.[c.id] ?? protocol.group;
			const all = compNorms.get(c.id) ?? [];
			const norm = all.find((n) => n.group === groupId);
			if (!norm) {
				throw new ReconcileInputError(`no norms for composite ${JSON.stringify(c.id)} in group ${JSON.stringify(groupId)}`, ['protocol', 'group']);
			}
			const scorer = compositeScorer(norm);
			const partStates: TestState[] = [];
			for (const id of c.parts) {
				const st = states.get(id);
				if (!st) throw new ReconcileInputError(`composite ${JSON.stringify(c.id)}: unknown part ${JSON.stringify(id)}`, ['composites']);
				partStates.push(st);
			}
			const span = compositeSpan(c, input.tests);
			const pf = c.part_field;
			const refSum = (which: 1 | 2): number | null => {
				let s = 0;
				for (const st of partStates) {
					const pt = which === 1 ? st.pt1 : st.pt2;
					if (!pt) return null;
					const r = st.scorer.ref(pt, pf);
					if (typeof r !== 'number') return null;
					s += r;
				}
				return s;
			};
			const ownParts = (scores: PassInput['scores']): number | null => {
				let s = 0;
				for (const st of partStates) {
					const p = parseEntered(scores[st.test.id]?.[pf], pf);
					if (p === null || Number.isNaN(p)) return null;
					s += p;
				}
				return s;
			};
			const S1 = refSum(1);
			const S2 = refSum(2);
			const sameSum = S1 !== null && S2 !== null && S1 === S2;
			const cp1 = S1 !== null ? scorer.at(S1) : null;
			const cp2 = S2 !== null ? (sameSum ? cp1 : scorer.at(S2)) : null;
			const e1 = (first.scores[c.id] ?? EMPTY) as Partial<Record<CompositeField, Entered>>;
			const e2 = (second.scores[c.id] ?? EMPTY) as Partial<Record<CompositeField, Entered>>;
			const parts1 = ownParts(first.scores);
			const parts2 = ownParts(second.scores);
			const own = (e: Partial<Record<CompositeField, Entered>>, parts: number | null): number | null => {
				const p = parseEntered(e.sum, 'raw');
				if (p === null) return parts;
				return Number.isNaN(p) ? null : p;
			};
			const s1 = own(e1, parts1);
			const s2 = own(e2, parts2);
			const pctOnly = scorer.kind === 'percentile' || isPercentileOnly(all);
			const subj: Subject = { composite: c.id };
			let others: Scorer[] | undefined;
			const otherScorers = () => (others ??= all.filter((n) => n !== norm).map(compositeScorer));
			const sumOor = (x: Val): boolean => x.p !== null && (Number.isNaN(x.p) || x.band !== null || !Number.isInteger(x.p) || x.p < span[0] || x.p > span[1]);
			let fieldOf: DerivedField = 'z';
			const derivedOor = (x: Val): boolean => x.p !== null && x.band === null && (Number.isNaN(x.p) || !inBounds(fieldOf, x.p, null));
			fieldsCompared += 2 * c.reported.length;

			for (const field of COMPOSITE_FIELDS) {
				if (!c.reported.includes(field)) continue;
				if (field === 'sum') {
					const x1 = readVal(e1.sum, 'sum', false);
					const x2 = readVal(e2.sum, 'sum', false);
					const sumJudge =
						(partsSum: number | null) =>
						(r: Reference): Judgement => ({
							field: 'sum',
							r,
							u: null,
							alt: null,
							ownRaw: null,
							restricted: false,
							ownPartsSum: partsSum,
							flipped: () => undefined,
							otherGroups: () => [],
							adjacent: () => [],
							otherScales: () => [],
							outOfRange: sumOor
						});
					compareField(out, subj, 'sum', x1, x2, S1, S2, null, null, sumJudge(parts1), sumJudge(parts2), sumOor, { restricted: false });
					continue;
				}
				fieldOf = field;
				const bands = pctOnly && field === 'percentile';
				const x1 = readVal(e1[field], field, bands);
				const x2 = readVal(e2[field], field, bands);
				const r1 = cp1 ? (scorer.ref(cp1, field) ?? null) : null;
				const r2 = cp2 ? (cp2 === cp1 ? r1 : (scorer.ref(cp2, field) ?? null)) : null;
				const judge =
					(pt: Point, S: number, s: number | null) =>
					(r: Reference): Judgement => {
						const f = field;
						return {
							field: f,
							r,
							u: scorer.unrounded(pt, f),
							alt: null,
							ownRaw: null,
							restricted: pctOnly,
							carried: () => (s !== null && Number.isInteger(s) && s >= span[0] && s <= span[1] && s !== S ? scorer.ref(scorer.at(s), f) : undefined),
							flipped: () => scorer.flipped(pt, f),
							otherGroups: () => otherScorers().map((o) => o.ref(o.at(S), f)),
							adjacent: () => scorer.adjacent(pt, f),
							otherScales: () => DERIVED_FIELDS.filter((g) => g !== f).map((g) => scorer.ref(pt, g)),
							outOfRange: derivedOor
						};
					};
				compareField(out, subj, field, x1, x2, r1, r2, null, null, judge(cp1 as Point, S1 as number, s1), judge(cp2 as Point, S2 as number, s2), derivedOor, {
					restricted: pctOnly
				});
			}
		}
	}
	return { discrepancies: out, summary: { fields_compared: fieldsCompared, discrepancies: out.length } };
}

// ---------------------------------------------------------------- live field checks

export type FieldProblemCode = 'not_a_number' | 'out_of_range' | 'too_many_decimals' | 'sum_differs';

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
export function checkField(test: Pick<TestDef, 'raw' | 'bounds'>, field: Field, value: Entered, opts: { percentileBands?: boolean } = {}): FieldProblem[] {
	const p = parseEntered(value, field);
	if (p === null) return [];
	if (Number.isNaN(p)) {
		// on a percentile-only test a band is typed as written ("25-49", "<=5", ">=75")
		if (field === 'percentile' && opts.percentileBands && canonicalBand(value) !== null) return [];
		return [
			{
				code: 'not_a_number',
				message:
					field !== 'percentile' || hasDecimalComma(value)
						? notANumberMessage(value)
						: opts.percentileBands
							? 'Enter a percentile (or <1, >99) or a band as the table writes it (25-49, <=5, >=75).'
							: 'Enter a number (or <1, >99).'
			}
		];
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
				message:
					allowed === 0 ? 'Raw scores on this test are whole numbers.' : `Raw scores on this test have at most ${allowed} decimal${allowed === 1 ? '' : 's'}.`
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

/**
 * Live check of a composite's `sum` while it is typed: a whole number within the possible sums
 * (`span`, see compositeSpan), and — the scorer's own arithmetic, never the reference — equal to the
 * total of the part scores this pass has entered (when all are there and are numbers).
 */
export function checkCompositeSum(span: readonly [number, number], parts: readonly Entered[], sum: Entered): FieldProblem[] {
	const p = parseEntered(sum, 'raw');
	if (p === null) return [];
	if (Number.isNaN(p)) return [{ code: 'not_a_number', message: notANumberMessage(sum) }];
	const problems: FieldProblem[] = [];
	if (!Number.isInteger(p)) problems.push({ code: 'too_many_decimals', message: 'A sum of scores is a whole number.' });
	if (p < span[0] || p > span[1]) problems.push({ code: 'out_of_range', message: `The sum of these parts lies between ${span[0]} and ${span[1]}.` });
	const values: number[] = [];
	for (const v of parts) {
		const x = parseEntered(v, 'raw');
		if (x === null || Number.isNaN(x)) return problems;
		values.push(x);
	}
	const total = values.reduce((a, b) => a + b, 0);
	if (!eq(total, p)) {
		problems.push({ code: 'sum_differs', message: `The part scores entered add up to ${values.join(' + ')} = ${total}, not ${writtenForm(sum)}.` });
	}
	return problems;
}

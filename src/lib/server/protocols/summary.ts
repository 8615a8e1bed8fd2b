/**
 * The score summary of a verified protocol: verified values grouped by domain, with descriptive
 * labels, percentiles, confidence intervals where a reliability is known, and each score placed on
 * one common z axis for the bell curve.
 */
import { selectOne } from '../db';
import { models } from '../models';
import { reading } from '../models/protocol';
import { writeCsv } from '../../csv';
import { protocolFor, type Actor } from './service';
import { protocolTests, protocolComposites, normGroups, normSet, normDef, engineTest } from '../catalog';
import { jsonValue } from '../db';
import { testReferences } from '../../scoring/reconcile';
import type { NormEntry, CompositeField } from '../../scoring/norms';
import { isBand, bandWords, normalizePercentile } from '../../catalog/norm-forms';
import { finalScores, keptAgainstRecomputation } from './decisions';
import { protocolAmendments } from './amendments';
import { isSinglePass, SINGLE_PASS_NOTE } from '../verification';
import { notFound, ServiceError } from '../errors';
import { labelFor, AACN_2020 } from '../../scoring/labels';
import { confidenceInterval } from '../../scoring/reliability';
import { SCALES, parseEntered, normalInv, type DerivedField } from '../../scoring/scales';

const LABEL_ORDER: DerivedField[] = ['standard', 't', 'scaled', 'percentile'];

export interface SummaryRow {
	code: string;
	name: string;
	domain: string;
	unit: string;
	direction: string;
	group: string | null;
	raw: string | null;
	values: Partial<Record<DerivedField, string | null>>;
	reported: DerivedField[];
	/** The verified percentile, or one recomputed from the verified raw score when the test does not report it. */
	percentile: { value: string; recomputed: boolean } | null;
	label: { text: string; basis: DerivedField } | null;
	ci: { level: number; lower: number; upper: number; field: DerivedField } | null;
	/** Where the score sits on the common z axis (from the labelled score). */
	z: number | null;
	/** True when a verified derived score differs from what the verified raw score gives. */
	inconsistent: boolean;
	/** Cells whose kept value contradicts the recomputation: the reviewer's judgement, with the note. */
	kept: Partial<Record<'raw' | DerivedField, { recomputed: string | null; note: string | null }>>;
	/** A percentile-only norm: the percentile is a band, shown as written and kept off the bell curve. */
	band: { text: string; words: string } | null;
}

export interface CompositeSummaryRow {
	code: string;
	name: string;
	group: string | null;
	parts: { code: string; name: string }[];
	partField: string;
	values: Partial<Record<CompositeField, string | null>>;
	reported: CompositeField[];
	label: { text: string; basis: DerivedField } | null;
	ci: { level: number; lower: number; upper: number; field: DerivedField } | null;
	z: number | null;
}

function toZ(field: DerivedField, v: number): number {
	if (field === 'percentile') return normalInv(Math.min(99.5, Math.max(0.5, v)) / 100);
	if (field === 'z') return v;
	const s = SCALES[field];
	return (v - (s.mean as number)) / (s.sd as number);
}

export async function protocolSummary(protocolId: number, user: Actor) {
	const { p, duties } = await protocolFor(protocolId, user);
	if (!duties.includes('reviewer') && !duties.includes('lead')) throw notFound();
	if (p.status !== 'verified') throw new ServiceError(409, 'The summary is available once the protocol is verified (signed off).', undefined, 'not_verified');
	const ex = await reading(null, () => models().Examinee.findByPk(p.examinee_id, { attributes: ['code'] }));
	// batteries and users are catalog tables (their models belong to the catalog services)
	const battery = await selectOne<{ name: string }>('SELECT name FROM batteries WHERE id = :id', { id: p.battery_id });
	const signer = await selectOne<{ name: string }>('SELECT name FROM users WHERE id = :id', { id: p.verified_by });
	const set = await normSet(p.norm_set_id);
	const tests = await protocolTests(p.id);
	const composites = await protocolComposites(p.id);
	const groups = await normGroups(
		p.norm_set_id,
		tests.map((t) => t.code)
	);
	const scores = await finalScores(p.id, p.round);
	const against = await keptAgainstRecomputation(p.id, p.round);
	const amendments = (await protocolAmendments(p.id)).filter((a) => a.status === 'applied');
	const covariates = jsonValue<Record<string, number> | null>(p.covariates ?? null);
	const rows: SummaryRow[] = tests.map((t) => {
		const s = scores[t.code] ?? {};
		const values: Partial<Record<DerivedField, string | null>> = {};
		for (const f of t.reported) values[f] = s[f] ?? null;
		const norm = groups.find((g) => g.test_code === t.code && g.group_code === t.groupCode);
		// the references of the verified raw score through the test's own norm form (mean/SD, table, regression)
		let refs: Partial<Record<DerivedField, number | string>> | null;
		try {
			refs = norm ? testReferences(engineTest(t), normDef(norm) as NormEntry, s.raw ?? null, covariates) : null;
		} catch {
			refs = null;
		}
		const percentileOnly = t.normScale === 'percentile';
		let inconsistent = false;
		if (refs) {
			for (const f of t.reported) {
				const v = values[f] ?? null;
				const r = refs[f];
				if (v === null || r === undefined) continue;
				if (typeof r === 'string' || isBand(v)) {
					if (normalizePercentile(String(r)) !== normalizePercentile(v)) inconsistent = true;
				} else {
					const n = parseEntered(v, f);
					if (n !== null && !Number.isNaN(n) && Math.abs(n - r) > 1e-6) inconsistent = true;
				}
			}
		}
		const zRef = !percentileOnly && refs && typeof refs.z === 'number' ? refs.z : null;
		const pct = values.percentile ?? null;
		const band = percentileOnly && pct !== null ? { text: pct, words: bandWords(pct) } : null;
		const basis = percentileOnly ? undefined : LABEL_ORDER.find((f) => t.reported.includes(f) && values[f] != null);
		const basisValue = basis ? parseEntered(values[basis] ?? null, basis) : null;
		const label = basis && basisValue !== null && !Number.isNaN(basisValue) ? { text: labelFor(basis, basisValue, AACN_2020).label, basis } : null;
		const percentile =
			pct != null ? { value: pct, recomputed: false } : refs && refs.percentile !== undefined ? { value: String(refs.percentile), recomputed: true } : null;
		const ciField = (['standard', 't', 'scaled'] as const).find((f) => t.reported.includes(f) && values[f] != null);
		const ciValue = ciField ? parseEntered(values[ciField] ?? null, ciField) : null;
		const ci =
			t.reliability !== null && ciField && ciValue !== null && !Number.isNaN(ciValue)
				? (() => {
						const c = confidenceInterval(ciValue, ciField, t.reliability!, 0.95, t.bounds);
						return { level: 0.95, lower: c.lower, upper: c.upper, field: ciField };
					})()
				: null;
		// percentile bands say where a score lies only roughly, on a skewed count: no point on the curve
		const z = percentileOnly ? null : basis && basisValue !== null && !Number.isNaN(basisValue) ? toZ(basis, basisValue) : zRef;
		const kept: SummaryRow['kept'] = {};
		for (const k of against)
			if (k.test === t.code && (s[k.field] ?? null) !== null && (Number(s[k.field]) === Number(k.kept) || s[k.field] === k.kept))
				kept[k.field] = { recomputed: k.recomputed, note: k.note };
		return {
			code: t.code,
			name: t.name,
			domain: t.domainName,
			unit: t.unit,
			direction: t.direction,
			group: t.groupText,
			raw: s.raw ?? null,
			values,
			reported: t.reported,
			percentile,
			label,
			ci,
			z,
			inconsistent,
			kept,
			band
		};
	});
	// Composites first: their verified values, label from the index score, CI from the composite's reliability.
	const compositeRows: CompositeSummaryRow[] = composites.map((c) => {
		const s = (scores[c.code] ?? {}) as Partial<Record<CompositeField, string | null>>;
		const reported = c.reported as CompositeField[];
		const values: Partial<Record<CompositeField, string | null>> = {};
		for (const f of reported) values[f] = s[f] ?? null;
		const basis = LABEL_ORDER.find((f) => reported.includes(f) && values[f] != null);
		const basisValue = basis ? parseEntered(values[basis] ?? null, basis) : null;
		const ok = basis && basisValue !== null && !Number.isNaN(basisValue);
		const label = ok ? { text: labelFor(basis!, basisValue!, AACN_2020).label, basis: basis! } : null;
		const ciField = (['standard', 't', 'scaled'] as const).find((f) => reported.includes(f) && values[f] != null);
		const ciValue = ciField ? parseEntered(values[ciField] ?? null, ciField) : null;
		const ci =
			c.reliability !== null && ciField && ciValue !== null && !Number.isNaN(ciValue)
				? (() => {
						const x = confidenceInterval(ciValue, ciField, c.reliability!, 0.95, null);
						return { level: 0.95, lower: x.lower, upper: x.upper, field: ciField };
					})()
				: null;
		return {
			code: c.code,
			name: c.name,
			group: c.groupText,
			parts: c.parts.map((code) => ({ code, name: tests.find((t) => t.code === code)?.name ?? code })),
			partField: c.part_field,
			values,
			reported,
			label,
			ci,
			z: ok ? toZ(basis!, basisValue!) : null
		};
	});
	const placed = rows.filter((r) => r.z !== null);
	const offCurve = rows.filter((r) => r.band !== null).map((r) => r.name);
	return {
		protocol: {
			id: p.id,
			code: ex!.code,
			testDate: p.test_date,
			age: p.age_text,
			battery: battery!.name,
			round: p.round,
			verifiedAt: p.verified_at,
			verifiedBy: signer?.name ?? null,
			singlePass: await isSinglePass(p.id)
		},
		normSet: set ? { name: set.name, version: set.version, source: set.source } : null,
		composites: compositeRows,
		rows,
		amendments: amendments.map((a) => ({
			id: a.id,
			test: a.test_name ?? a.test_code,
			field: a.field,
			before: a.old_value,
			after: a.new_value,
			reason: a.reason,
			by: a.requested_by_name,
			approvedBy: a.decided_by_name,
			at: a.decided_at,
			round: a.round
		})),
		offCurve,
		lowScores: { below: placed.filter((r) => (r.z as number) < -1).length, given: placed.length },
		labelScheme: { name: AACN_2020.name, source: AACN_2020.source }
	};
}

/** The summary as CSV (one row per test) through the one CSV writer (src/lib/csv.ts), norms and caution as comment lines. */
export function summaryCsv(s: Awaited<ReturnType<typeof protocolSummary>>): string {
	const head = [
		'examinee_code',
		'test_date',
		'age',
		'domain',
		'test',
		'norm_group',
		'raw',
		'z',
		'standard',
		'scaled',
		't',
		'percentile',
		'percentile_recomputed',
		'label',
		'ci95_lower',
		'ci95_upper',
		'ci_scale',
		'entry',
		'kept_against_recomputation',
		'sum'
	];
	const entry = s.protocol.singlePass ? 'single pass' : 'double entry';
	// composites first (raw is empty; the sum of the parts is in the last column)
	const composites = s.composites.map((c) => [
		s.protocol.code,
		s.protocol.testDate,
		s.protocol.age,
		'Composite',
		c.name,
		c.group,
		null,
		c.values.z,
		c.values.standard,
		c.values.scaled,
		c.values.t,
		c.values.percentile,
		'no',
		c.label?.text,
		c.ci?.lower,
		c.ci?.upper,
		c.ci?.field,
		entry,
		'',
		c.values.sum
	]);
	const rows = s.rows.map((r) => [
		s.protocol.code,
		s.protocol.testDate,
		s.protocol.age,
		r.domain,
		r.name,
		r.group,
		r.raw,
		r.values.z,
		r.values.standard,
		r.values.scaled,
		r.values.t,
		r.percentile?.value,
		r.percentile?.recomputed ? 'yes' : 'no',
		r.label?.text,
		r.ci?.lower,
		r.ci?.upper,
		r.ci?.field,
		entry,
		Object.entries(r.kept)
			.map(([f, k]) => `${f} (recomputed ${k?.recomputed})`)
			.join('; '),
		null
	]);
	return writeCsv(head, [...composites, ...rows], {
		comments: [
			...(s.protocol.singlePass ? [`# ${SINGLE_PASS_NOTE}`] : []),
			`# Norms: ${s.normSet ? `${s.normSet.name} (${s.normSet.version}). ${s.normSet.source}` : 'unknown'}`,
			'# Scores support, and never replace, the judgement of a licensed clinician.'
		]
	});
}

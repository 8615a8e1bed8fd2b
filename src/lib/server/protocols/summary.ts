/**
 * The score summary of a verified protocol: verified values grouped by domain, with descriptive
 * labels, percentiles, confidence intervals where a reliability is known, and each score placed on
 * one common z axis for the bell curve.
 */
import { selectOne } from '../db';
import { writeCsv } from '../../csv';
import { protocolFor, type Actor } from './service';
import { protocolTests, normGroups, normSet } from './catalog-read';
import { finalScores, keptAgainstRecomputation } from './review';
import { protocolAmendments } from './amendments';
import { isSinglePass, SINGLE_PASS_NOTE } from '../verification';
import { notFound, WorkflowError } from './errors';
import { labelFor, AACN_2020 } from '../../scoring/labels';
import { confidenceInterval } from '../../scoring/reliability';
import { SCALES, parseEntered, normalInv, zFromRaw, referenceScore, type DerivedField } from '../../scoring/scales';

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
	if (p.status !== 'verified') throw new WorkflowError(409, 'The summary is available once the protocol is verified (signed off).', undefined, 'not_verified');
	const ex = await selectOne<{ code: string }>('SELECT code FROM examinees WHERE id = :id', { id: p.examinee_id });
	const battery = await selectOne<{ name: string }>('SELECT name FROM batteries WHERE id = :id', { id: p.battery_id });
	const signer = await selectOne<{ name: string }>('SELECT name FROM users WHERE id = :id', { id: p.verified_by });
	const set = await normSet(p.norm_set_id);
	const tests = await protocolTests(p.id);
	const groups = await normGroups(p.norm_set_id, tests.map((t) => t.code));
	const scores = await finalScores(p.id, p.round);
	const against = await keptAgainstRecomputation(p.id, p.round);
	const amendments = (await protocolAmendments(p.id)).filter((a) => a.status === 'applied');
	const rows: SummaryRow[] = tests.map((t) => {
		const s = scores[t.code] ?? {};
		const values: Partial<Record<DerivedField, string | null>> = {};
		for (const f of t.reported) values[f] = s[f] ?? null;
		const norm = groups.find((g) => g.test_code === t.code && g.group_code === t.groupCode);
		const raw = parseEntered(s.raw ?? null, 'raw');
		const zRef = raw !== null && !Number.isNaN(raw) && norm ? zFromRaw(raw, Number(norm.mean), Number(norm.sd), t.direction) : null;
		let inconsistent = false;
		if (zRef !== null) {
			for (const f of t.reported) {
				const v = parseEntered(values[f] ?? null, f);
				if (v !== null && !Number.isNaN(v) && Math.abs(v - referenceScore(f, zRef, t.bounds)) > 1e-6) inconsistent = true;
			}
		}
		const basis = LABEL_ORDER.find((f) => t.reported.includes(f) && values[f] != null);
		const basisValue = basis ? parseEntered(values[basis] ?? null, basis) : null;
		const label = basis && basisValue !== null && !Number.isNaN(basisValue) ? { text: labelFor(basis, basisValue, AACN_2020).label, basis } : null;
		const pct = values.percentile ?? null;
		const percentile = pct != null ? { value: pct, recomputed: false } : zRef !== null ? { value: String(referenceScore('percentile', zRef)), recomputed: true } : null;
		const ciField = (['standard', 't', 'scaled'] as const).find((f) => t.reported.includes(f) && values[f] != null);
		const ciValue = ciField ? parseEntered(values[ciField] ?? null, ciField) : null;
		const ci =
			t.reliability !== null && ciField && ciValue !== null && !Number.isNaN(ciValue)
				? (() => {
						const c = confidenceInterval(ciValue, ciField, t.reliability!, 0.95, t.bounds);
						return { level: 0.95, lower: c.lower, upper: c.upper, field: ciField };
					})()
				: null;
		const z = basis && basisValue !== null && !Number.isNaN(basisValue) ? toZ(basis, basisValue) : zRef;
		const kept: SummaryRow['kept'] = {};
		for (const k of against) if (k.test === t.code && (s[k.field] ?? null) !== null && Number(s[k.field]) === Number(k.kept)) kept[k.field] = { recomputed: k.recomputed, note: k.note };
		return { code: t.code, name: t.name, domain: t.domainName, unit: t.unit, direction: t.direction, group: t.groupText, raw: s.raw ?? null, values, reported: t.reported, percentile, label, ci, z, inconsistent, kept };
	});
	const placed = rows.filter((r) => r.z !== null);
	return {
		protocol: { id: p.id, code: ex!.code, testDate: p.test_date, age: p.age_text, battery: battery!.name, round: p.round, verifiedAt: p.verified_at, verifiedBy: signer?.name ?? null, singlePass: await isSinglePass(p.id) },
		normSet: set ? { name: set.name, version: set.version, source: set.source } : null,
		rows,
		amendments: amendments.map((a) => ({ id: a.id, test: a.test_name ?? a.test_code, field: a.field, before: a.old_value, after: a.new_value, reason: a.reason, by: a.requested_by_name, approvedBy: a.decided_by_name, at: a.decided_at, round: a.round })),
		lowScores: { below: placed.filter((r) => (r.z as number) < -1).length, given: placed.length },
		labelScheme: { name: AACN_2020.name, source: AACN_2020.source }
	};
}

/** The summary as CSV (one row per test) through the one CSV writer (src/lib/csv.ts), norms and caution as comment lines. */
export function summaryCsv(s: Awaited<ReturnType<typeof protocolSummary>>): string {
	const head = ['examinee_code', 'test_date', 'age', 'domain', 'test', 'norm_group', 'raw', 'z', 'standard', 'scaled', 't', 'percentile', 'percentile_recomputed', 'label', 'ci95_lower', 'ci95_upper', 'ci_scale', 'entry', 'kept_against_recomputation'];
	const entry = s.protocol.singlePass ? 'single pass' : 'double entry';
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
		Object.entries(r.kept).map(([f, k]) => `${f} (recomputed ${k?.recomputed})`).join('; ')
	]);
	return writeCsv(head, rows, {
		comments: [
			...(s.protocol.singlePass ? [`# ${SINGLE_PASS_NOTE}`] : []),
			`# Norms: ${s.normSet ? `${s.normSet.name} (${s.normSet.version}). ${s.normSet.source}` : 'unknown'}`,
			'# Scores support, and never replace, the judgement of a licensed clinician.'
		]
	});
}

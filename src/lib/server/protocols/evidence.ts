/**
 * Judging a test's derived discrepancies again once its raw score is settled (product.md, Review;
 * reconcile.md rule 5). Runs inside the transaction that records the raw decision (or applies an
 * amendment's raw decision), so the decision and its consequences commit together or not at all.
 *
 * Against the reference of the kept raw score:
 * - a derived discrepancy whose value (the value of the pass whose raw score was kept, for a shared
 *   one) now equals the reference closes itself: "settled by the raw decision", kept value = the
 *   reference, resolver = who settled the raw score, recorded in the audit trail;
 * - the others stay open (or open again, if an earlier raw decision had settled them) and show the
 *   new recomputed value, with their kind named again against it;
 * - a reported derived field with no discrepancy whose verified value (from the pass whose raw score
 *   was kept, else the first pass) differs from the new reference gets a new open discrepancy: this
 *   is what "choosing another raw value recomputes from that value" means for fields both passes
 *   agreed on.
 * Decisions a reviewer made by hand on a derived field are left as they are.
 */
import { Op, type Transaction } from 'sequelize';
import { ServiceError } from '../errors';
import { jsonValue, type Tx } from '../db';
import { models } from '../models';
import { dbNow, inTx, saveLocked, type DiscrepancyRow, type SettledBy } from '../models/protocol';
import { recordEvent } from '../trail';
import { protocolTests, normGroups, normDef, engineTest } from '../catalog';
import { reconcile, testReferences, type Kind } from '../../scoring/reconcile';
import type { NormEntry } from '../../scoring/norms';
import { parseEntered, zFromRaw, formatReference, DERIVED_FIELDS, type DerivedField, type Field } from '../../scoring/scales';
import { recordResolution } from '../audit-stats/record';
import type { Scores } from './passes';

export type { SettledBy };

const EPS = 1e-6;
const num = (v: string | null | undefined, f: Field) => {
	const n = parseEntered(v ?? null, f);
	return n === null || Number.isNaN(n) ? null : n;
};
const eq = (v: string | null | undefined, r: number, f: Field) => {
	const n = num(v, f);
	return n !== null && Math.abs(n - r) <= EPS;
};

export interface RejudgeResult {
	settled: number[];
	reopened: number[];
	updated: number[];
	added: number[];
}

/**
 * The references of a test's reported derived fields for one raw score (null when the raw score is
 * not a usable value of the test).
 */
export async function referencesForRaw(protocolId: number, normSetId: number, testCode: string, raw: string | null, t: Tx) {
	const tests = await protocolTests(protocolId, t);
	const test = tests.find((x) => x.code === testCode);
	if (!test) return null;
	const groups = await normGroups(normSetId, [testCode], t);
	const norm = groups.find((g) => g.group_code === test.groupCode);
	const n = num(raw, 'raw');
	// the engine's own computation (reconcile.md): the same references the second submit used
	const all = norm ? safeReferences(test, norm, raw) : null;
	if (!norm || n === null || !all || norm.mean === null || norm.sd === null) return { test, norm: norm ?? null, groups, z: null, refs: null };
	const z = zFromRaw(n, Number(norm.mean), Number(norm.sd), test.direction);
	const refs: Partial<Record<DerivedField, number>> = {};
	for (const f of test.reported) {
		const r = all[f];
		if (typeof r === 'number') refs[f] = r;
	}
	return { test, norm, groups, z, raw: n, refs };
}

/** testReferences, or null for a norm form this engine version does not handle (nothing is re-judged then). */
function safeReferences(test: Parameters<typeof engineTest>[0], norm: Parameters<typeof normDef>[0], raw: string | null | undefined) {
	try {
		return testReferences(engineTest(test), normDef(norm) as NormEntry, raw ?? null);
	} catch {
		return null;
	}
}

/**
 * The kind of value `v` in `field` judged against the reference of `keptRaw`, named by the engine
 * itself: a one-test reconciliation whose first pass holds the kept raw score and `v`, and whose
 * second pass holds `altRaw` (the other pass's raw score, for rule 5's follows_other_raw).
 */
export function kindAgainst(
	test: Parameters<typeof engineTest>[0],
	groups: Parameters<typeof normDef>[0][],
	groupCode: string,
	keptRaw: string,
	altRaw: string | null,
	field: DerivedField,
	v: string | null
): Kind {
	try {
		const result = reconcile({
			tests: [{ ...engineTest(test), reported: [field] }],
			norms: groups.map(normDef),
			protocol: { group: groupCode },
			passes: [
				{ scorer: 'first', scores: { [test.code]: { raw: keptRaw, [field]: v } } },
				{ scorer: 'second', scores: { [test.code]: { raw: altRaw ?? keptRaw } } }
			]
		});
		const d = result.discrepancies.find((x) => x.field === field && x.pass === 'first');
		return (d?.kind as Kind | undefined) ?? 'mismatch';
	} catch {
		return 'mismatch';
	}
}

export async function rejudgeDerived(
	p: { id: number; round: number; norm_set_id: number },
	testCode: string,
	keptRaw: string,
	cause: { by: SettledBy; id: number; actorId: number },
	t: Transaction
): Promise<RejudgeResult> {
	const out: RejudgeResult = { settled: [], reopened: [], updated: [], added: [] };
	const info = await referencesForRaw(p.id, p.norm_set_id, testCode, keptRaw, t);
	if (!info || !info.refs || info.z === null || !info.norm) return out;
	const { test, refs, z } = info;
	void z;

	const { Pass, Discrepancy } = models();
	const passes = await Pass.findAll({ attributes: ['which', 'scores'], where: { protocol_id: p.id, round: p.round }, transaction: t });
	const scoresOf = (w: 'first' | 'second') => (jsonValue<Scores>(passes.find((x) => x.which === w)?.scores) ?? {})[testCode] ?? {};
	const first = scoresOf('first');
	const second = scoresOf('second');
	const keptN = num(keptRaw, 'raw');
	// rule 5 after the decision: a value right for the other pass's raw score is still named so
	const ownRefs = (w: 'first' | 'second') => (info.norm ? safeReferences(test, info.norm, (w === 'first' ? first : second).raw ?? null) : null);
	const refsFirst = ownRefs('first');
	const refsSecond = ownRefs('second');
	void refsFirst;
	void refsSecond;
	// the other pass's raw score (rule 5): a value right for it is still named so after the decision
	const altRawFor = (pass: 'first' | 'second' | 'both') => (pass === 'first' ? (second.raw ?? null) : pass === 'second' ? (first.raw ?? null) : null);
	const kindOf = (field: DerivedField, pass: 'first' | 'second' | 'both', v: string | null) =>
		kindAgainst(test, info.groups, info.norm!.group_code, keptRaw, altRawFor(pass), field, v);
	const base: 'first' | 'second' =
		keptN !== null && num(first.raw, 'raw') === keptN ? 'first' : keptN !== null && num(second.raw, 'raw') === keptN ? 'second' : 'first';

	const found = await Discrepancy.findAll({
		where: { protocol_id: p.id, round: p.round, test_code: testCode, field: { [Op.ne]: 'raw' } },
		order: [['position', 'ASC']],
		...inTx(t, true)
	});
	const rows = found.map((x) => x.get({ plain: true }) as DiscrepancyRow);
	// rows are locked FOR UPDATE: a version moved under us would be a bug, answered as a conflict
	const stale = () => new ServiceError(409, 'This protocol changed at the same moment; nothing was saved. Reload and try again.', undefined, 'stale');
	for (const [i, d] of rows.entries()) {
		const row = found[i];
		const field = d.field as DerivedField;
		const r = refs[field];
		if (r === undefined) continue;
		const open = d.resolved_at === null;
		if (!open && d.settled_by === null) continue; // a reviewer's own decision stands
		const rs = formatReference(field, r);
		// the value that decides: the flagged pass's; for a shared one, the kept raw score's pass's
		const candidate = d.pass === 'both' ? (base === 'second' ? d.other : d.value) : d.value;
		if (eq(candidate, r, field)) {
			if (!open && d.expected === rs) continue; // already settled against this very reference
			row.set({
				expected: rs,
				resolution: 'recomputed',
				resolved_value: rs,
				note: null,
				resolved_by: cause.actorId,
				resolved_at: dbNow(),
				settled_by: cause.by,
				settled_by_id: cause.id
			});
			await saveLocked(row, t, stale);
			await recordEvent(
				{
					actorId: cause.actorId,
					entity: 'discrepancy',
					entityId: d.id,
					protocolId: p.id,
					action: cause.by === 'raw_decision' ? 'settled_by_raw_decision' : 'settled_by_amendment',
					oldValue: { test: testCode, field, pass: d.pass, value: d.value, other: d.other, expected: d.expected, kind: d.kind },
					newValue: { value: rs, keptRaw, [cause.by === 'raw_decision' ? 'rawDiscrepancy' : 'amendment']: cause.id }
				},
				t
			);
			await recordResolution(d.id, t);
			out.settled.push(d.id);
			continue;
		}
		// stays open (or opens again) with the new recomputed value and its kind named against it
		const v = d.pass === 'both' ? candidate : d.value;
		const kind = kindOf(field, d.pass, v ?? null);
		if (open && d.expected === rs && d.kind === kind) continue;
		row.set({ expected: rs, kind, resolution: null, resolved_value: null, resolved_by: null, resolved_at: null, settled_by: null, settled_by_id: null });
		await saveLocked(row, t, stale);
		await recordEvent(
			{
				actorId: cause.actorId,
				entity: 'discrepancy',
				entityId: d.id,
				protocolId: p.id,
				action: 'rejudged',
				oldValue: { test: testCode, field, expected: d.expected, kind: d.kind, open },
				newValue: { expected: rs, kind, keptRaw }
			},
			t
		);
		if (!open) await recordResolution(d.id, t);
		(open ? out.updated : out.reopened).push(d.id);
	}

	// Fields with no discrepancy at all: the verified value must fit the kept raw score too.
	// a field counts as judged when a row holds the base pass's value (its own row, or a shared one)
	const flagged = new Set(rows.filter((d) => d.pass === base || d.pass === 'both').map((d) => d.field));
	const baseScores = base === 'first' ? first : second;
	const otherScores = base === 'first' ? second : first;
	let position = Number(((await Discrepancy.max('position', { where: { protocol_id: p.id, round: p.round }, transaction: t })) as number | null) ?? 0);
	for (const field of DERIVED_FIELDS) {
		const r = refs[field];
		if (r === undefined || flagged.has(field)) continue;
		const v = baseScores[field] ?? null;
		if (eq(v, r, field)) continue;
		const kind = kindOf(field, base, v);
		const rs = formatReference(field, r);
		const { id: insertId } = await Discrepancy.create(
			{
				protocol_id: p.id,
				round: p.round,
				position: ++position,
				test_code: testCode,
				field,
				pass: base,
				kind,
				value: v,
				other: otherScores[field] ?? null,
				expected: rs
			},
			{ transaction: t }
		);
		await recordEvent(
			{
				actorId: cause.actorId,
				entity: 'discrepancy',
				entityId: insertId,
				protocolId: p.id,
				action: 'rejudged',
				oldValue: { test: testCode, field, value: v },
				newValue: { expected: rs, kind, keptRaw, added: true }
			},
			t
		);
		out.added.push(insertId);
	}
	return out;
}

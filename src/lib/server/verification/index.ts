/**
 * Risk-based verification (issue 19): a battery's second-pass policy, each scorer's standing under
 * it, the draw at the first pass's submission, the single-pass check, and the Audit numbers.
 *
 * The draw happens in the first submission's transaction, from node:crypto's randomInt, and only
 * there: before the submit no row, page, API answer or e-mail can tell whether the protocol will get a
 * second pass. Not drawn → the protocol goes to review as a single pass checked against the
 * recomputation; the second scorer's assignment is released (kept on record, their pass closed: it
 * leaves their worklist and can no longer be saved or submitted).
 *
 * Statistics: ../../scoring/verification.ts (formulas and sources in ../../scoring/README.md).
 */
import { randomInt } from 'node:crypto';
import { z } from 'zod';
import { Op, type Transaction } from 'sequelize';
import { select, selectOne, exec, transaction, type Tx } from '../db';
import { countEvents, recordEvent } from '../trail';
import { verificationModels, type DrawOutcome } from '../models/verification';
import { dbNow, inTx, reading, saveLocked } from '../models/protocol';
import { models } from '../models';
import {
	DEFAULT_POLICY,
	policyProblems,
	qualifies,
	protocolAboveThreshold,
	singlePassFindings,
	undetectedErrors,
	type SamplingPolicy,
	type Qualification
} from '../../scoring/verification';
import { reconcile, ReconcileInputError } from '../../scoring/reconcile';
import { protocolFor, type Actor, type ProtocolRow, type Duty } from '../protocols/service';
import { engineInput, storeDiscrepancies, type Scores } from '../protocols/passes';
import { conflict, invalid, notFound, ServiceError } from '../errors';
import { enqueueMail } from '../mail/outbox';
import { insertMany, applyToDaily, AUDIT_FIELDS_COLUMNS, domainOf, fieldCounts } from '../audit-stats/record';

const DRAW_SCALE = 1_000_000;

// ---------------------------------------------------------------- policy

export interface BatteryPolicy extends SamplingPolicy {
	batteryId: number;
	updatedAt: Date | null;
	updatedBy: number | null;
}

export async function getPolicy(batteryId: number, t?: Tx): Promise<BatteryPolicy> {
	const { VerificationPolicy } = verificationModels();
	const row = await VerificationPolicy.findByPk(batteryId, { transaction: t ?? undefined });
	if (!row) return { ...DEFAULT_POLICY, batteryId, updatedAt: null, updatedBy: null };
	return {
		batteryId,
		mode: row.mode,
		minFields: row.min_fields,
		windowDays: row.window_days,
		thresholdPer100: Number(row.threshold_per100),
		probability: Number(row.probability),
		updatedAt: row.updated_at,
		updatedBy: row.updated_by
	};
}

const num = (label: string) => z.coerce.number({ error: `${label}: a number` }).refine(Number.isFinite, `${label}: a number`);
export const policySchema = z.object({
	mode: z.enum(['every', 'sampled'], { error: 'mode: choose "every protocol double-entered" or "sampled"' }),
	minFields: num('minFields').default(DEFAULT_POLICY.minFields),
	windowDays: num('windowDays').default(DEFAULT_POLICY.windowDays),
	thresholdPer100: num('thresholdPer100').default(DEFAULT_POLICY.thresholdPer100),
	/** In percent, as a lead types it (25 = 25%). */
	probabilityPercent: num('probabilityPercent').default(DEFAULT_POLICY.probability * 100)
});

/** A lead sets a battery's policy; the change (old and new) goes into the audit trail. */
export async function setPolicy(batteryId: number, body: unknown, actor: Actor): Promise<BatteryPolicy> {
	const parsed = policySchema.safeParse(body);
	if (!parsed.success) {
		const issue = parsed.error.issues[0];
		throw invalid(issue.message.includes(':') ? issue.message : `${issue.path.join('.')}: ${issue.message}`, String(issue.path[0] ?? 'mode'));
	}
	const next: SamplingPolicy = {
		mode: parsed.data.mode,
		minFields: parsed.data.minFields,
		windowDays: parsed.data.windowDays,
		thresholdPer100: parsed.data.thresholdPer100,
		probability: Math.round(parsed.data.probabilityPercent * 100) / 10_000
	};
	const problems = policyProblems(next);
	if (problems.length) throw invalid(problems[0], problems[0].split(':')[0]);
	return transaction(async (t) => {
		const battery = await models().Battery.findByPk(batteryId, { attributes: ['id'], lock: true, transaction: t });
		if (!battery) throw notFound('This battery');
		const before = await getPolicy(batteryId, t);
		const { VerificationPolicy } = verificationModels();
		await VerificationPolicy.upsert(
			{
				battery_id: batteryId,
				mode: next.mode,
				min_fields: next.minFields,
				window_days: next.windowDays,
				threshold_per100: next.thresholdPer100,
				probability: next.probability,
				updated_by: actor.id,
				updated_at: new Date()
			},
			{ transaction: t }
		);
		const plain = (p: SamplingPolicy) => ({
			mode: p.mode,
			minFields: p.minFields,
			windowDays: p.windowDays,
			thresholdPer100: p.thresholdPer100,
			probability: p.probability
		});
		await recordEvent(
			{ actorId: actor.id, entity: 'verification_policy', entityId: batteryId, action: 'set_policy', oldValue: plain(before), newValue: plain(next) },
			t
		);
		return getPolicy(batteryId, t);
	});
}

// ---------------------------------------------------------------- a scorer's record and standing

export interface Standing {
	mode: 'full' | 'sampled';
	since: Date | null;
	revertedAt: Date | null;
	reason: string | null;
}

export async function standing(scorerId: number, batteryId: number, t?: Tx): Promise<Standing> {
	const { VerificationScorer } = verificationModels();
	const row = await VerificationScorer.findOne({ where: { scorer_id: scorerId, battery_id: batteryId }, transaction: t ?? undefined });
	if (!row) return { mode: 'full', since: null, revertedAt: null, reason: null };
	return { mode: row.mode, since: row.since, revertedAt: row.reverted_at, reason: row.reason };
}

/**
 * Raw fields a scorer entered in double-entered rounds of a battery since `from`, and the raw-score
 * errors counted against them there: resolved raw discrepancies whose kept value is not theirs
 * (error_events), plus unresolved raw discrepancies involving their pass (cautious until resolved).
 */
export async function rawRecord(scorerId: number, batteryId: number, from: Date, t?: Tx): Promise<{ fields: number; errors: number }> {
	// aggregates over the audit's and the protocol side's tables
	const f = await selectOne<{ n: number | null }>(
		`SELECT SUM(raw_fields) AS n FROM audit_fields WHERE scorer_id = :s AND battery_id = :b AND test_code <> '' AND entered_at >= :from`,
		{ s: scorerId, b: batteryId, from },
		t
	);
	const resolved = await selectOne<{ n: number }>(
		`SELECT COUNT(*) AS n FROM error_events WHERE scorer_id = :s AND battery_id = :b AND field = 'raw' AND entered_at >= :from`,
		{ s: scorerId, b: batteryId, from },
		t
	);
	const open = await selectOne<{ n: number }>(
		`SELECT COUNT(*) AS n FROM discrepancies d
		   JOIN protocols p ON p.id = d.protocol_id AND p.round = d.round
		   JOIN passes pa ON pa.protocol_id = d.protocol_id AND pa.round = d.round AND pa.scorer_id = :s AND pa.status = 'submitted'
		  WHERE d.field = 'raw' AND d.resolved_at IS NULL AND p.battery_id = :b AND pa.submitted_at >= :from
		    AND (d.pass = 'both' OR d.pass = pa.which)
		    AND NOT EXISTS (SELECT 1 FROM verification_protocols v WHERE v.protocol_id = p.id AND v.outcome = 'not_drawn')`,
		{ s: scorerId, b: batteryId, from },
		t
	);
	return { fields: Number(f?.n ?? 0), errors: Number(resolved?.n ?? 0) + Number(open?.n ?? 0) };
}

/** Where the qualification window starts: the window, but never before the last return to full. */
function windowStart(policy: SamplingPolicy, s: Standing, now = new Date()): Date {
	const from = new Date(now.getTime() - policy.windowDays * 86_400_000);
	return s.revertedAt && s.revertedAt > from ? new Date(s.revertedAt) : from;
}

export async function qualification(scorerId: number, batteryId: number, policy: SamplingPolicy, s: Standing, t?: Tx): Promise<Qualification & { from: Date }> {
	const from = windowStart(policy, s);
	const r = await rawRecord(scorerId, batteryId, from, t);
	return { ...qualifies(r.errors, r.fields, policy), from };
}

async function setStanding(scorerId: number, batteryId: number, mode: 'full' | 'sampled', reason: string, reverted: boolean, t: Transaction) {
	const { VerificationScorer } = verificationModels();
	const now = new Date();
	const before = await standing(scorerId, batteryId, t);
	await VerificationScorer.upsert(
		{ scorer_id: scorerId, battery_id: batteryId, mode, since: now, reverted_at: reverted ? now : before.revertedAt, reason: reason.slice(0, 300) },
		{ transaction: t }
	);
	await recordEvent(
		{
			actorId: null,
			entity: 'verification_scorer',
			entityId: `${scorerId}:${batteryId}`,
			action: mode === 'sampled' ? 'sampling_on' : 'sampling_off',
			oldValue: { mode: before.mode, since: before.since },
			newValue: { mode, scorer: scorerId, battery: batteryId },
			reason
		},
		t
	);
}

/** Put a scorer back on full double entry at once and e-mail the leads (through the outbox). */
async function backToFull(scorerId: number, batteryId: number, reason: string, t: Transaction) {
	await setStanding(scorerId, batteryId, 'full', reason, true, t);
	// how many times the standing moved (counted on the trail): makes the e-mail's key unique
	const n = await countEvents('verification_scorer', `${scorerId}:${batteryId}`, t);
	await enqueueMail('verification_full', `verification-full:${scorerId}:${batteryId}:${n}`, { scorerId, batteryId, reason }, t);
}

/**
 * Re-read a scorer's record under the battery's policy and move their standing: full → sampled when
 * they qualify; sampled → full when they no longer do (e-mailing the leads when it is the error rate).
 */
export async function reassess(
	scorerId: number,
	batteryId: number,
	t: Transaction
): Promise<{ standing: Standing; qualification: Qualification | null; policy: SamplingPolicy }> {
	const policy = await getPolicy(batteryId, t);
	let s = await standing(scorerId, batteryId, t);
	if (policy.mode !== 'sampled') return { standing: s, qualification: null, policy };
	const q = await qualification(scorerId, batteryId, policy, s, t);
	if (s.mode === 'full' && q.qualifies) {
		await setStanding(
			scorerId,
			batteryId,
			'sampled',
			`qualified: ${q.errors} raw-score errors in ${q.fields} raw fields, 95% upper bound ${q.upperPer100.toFixed(3)} per 100 < ${policy.thresholdPer100}`,
			false,
			t
		);
	} else if (s.mode === 'sampled' && !q.qualifies) {
		if (q.fields >= policy.minFields)
			await backToFull(
				scorerId,
				batteryId,
				`rolling raw-score error rate: ${q.errors} in ${q.fields} raw fields, 95% upper bound ${q.upperPer100.toFixed(3)} per 100 is not below ${policy.thresholdPer100}`,
				t
			);
		else await setStanding(scorerId, batteryId, 'full', `fewer than ${policy.minFields} raw fields in the window (${q.fields})`, false, t);
	}
	s = await standing(scorerId, batteryId, t);
	return { standing: s, qualification: q, policy };
}

// ---------------------------------------------------------------- the draw

const entered = (v: unknown) => v !== null && v !== undefined && String(v).trim() !== '';
export const rawFieldsOf = (scores: Scores) => Object.values(scores).filter((x) => entered(x?.raw)).length;

/**
 * At the first pass's submission (inside its transaction, after the pass is marked submitted):
 * decide whether this protocol gets a second pass. Returns the outcome; 'not_drawn' = single pass.
 */
export async function decideAtFirstSubmit(p: ProtocolRow, scores: Scores, fieldsEntered: number, actor: Actor, t: Transaction): Promise<DrawOutcome> {
	const { VerificationProtocol } = verificationModels();
	const row = await VerificationProtocol.findByPk(p.id, { transaction: t, lock: t.LOCK.UPDATE });
	const policy = await getPolicy(p.battery_id, t);
	let outcome: DrawOutcome;
	let drawValue: number | null = null;
	let qual: Qualification | null = null;
	if (row?.required_by) outcome = 'required';
	else if (policy.mode !== 'sampled') outcome = 'policy_full';
	else {
		const r = await reassess(p.first_scorer_id, p.battery_id, t);
		qual = r.qualification;
		if (r.standing.mode !== 'sampled') outcome = 'scorer_full';
		else {
			drawValue = randomInt(0, DRAW_SCALE);
			outcome = drawValue < Math.round(policy.probability * DRAW_SCALE) ? 'drawn' : 'not_drawn';
		}
	}
	const plainPolicy = {
		mode: policy.mode,
		minFields: policy.minFields,
		windowDays: policy.windowDays,
		thresholdPer100: policy.thresholdPer100,
		probability: policy.probability
	};
	await VerificationProtocol.upsert(
		{
			protocol_id: p.id,
			required_by: row?.required_by ?? null,
			required_at: row?.required_at ?? null,
			required_reason: row?.required_reason ?? null,
			outcome,
			decided_at: new Date(),
			scorer_id: p.first_scorer_id,
			battery_id: p.battery_id,
			probability: outcome === 'drawn' || outcome === 'not_drawn' ? policy.probability : null,
			draw_value: drawValue,
			raw_fields: rawFieldsOf(scores),
			fields_entered: fieldsEntered,
			checked_at: null,
			policy: plainPolicy
		},
		{ transaction: t }
	);
	if (outcome !== 'policy_full') {
		await recordEvent(
			{
				actorId: actor.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'verification_draw',
				newValue: {
					outcome,
					drawValue,
					scale: DRAW_SCALE,
					policy: plainPolicy,
					qualification: qual ? { fields: qual.fields, errors: qual.errors, upperPer100: qual.upperPer100 } : null
				}
			},
			t
		);
	}
	return outcome;
}

/** Records the single pass in the audit's summaries: derived fields only (its raw scores were not checked). */
async function recordSinglePass(p: ProtocolRow, pass: { id: number; scorer_id: number; fields_entered: number; scores: Scores }, t: Transaction) {
	const codes = Object.keys(pass.scores);
	const domains = new Map<string, string>();
	if (codes.length)
		for (const r of await models().Test.findAll({
			attributes: ['code', 'domain'],
			where: { code: codes },
			order: [
				['is_current', 'ASC'],
				['version', 'ASC']
			],
			transaction: t
		}))
			domains.set(r.code, r.domain);
	const at = new Date();
	const rawCount = rawFieldsOf(pass.scores);
	const rows: unknown[][] = [
		[pass.id, '', p.id, p.round, 'first', pass.scorer_id, p.battery_id, '', Math.max(0, Number(pass.fields_entered) - rawCount), 0, 0, at]
	];
	for (const code of codes) {
		// a composite's sum counts as derived here too (fieldCounts), as in the whole-pass row above
		const { derived } = fieldCounts(pass.scores[code]);
		if (derived) rows.push([pass.id, code, p.id, p.round, 'first', pass.scorer_id, p.battery_id, domainOf(domains, code), derived, 0, derived, at]);
	}
	await applyToDaily({ protocolId: p.id, round: p.round }, -1, t);
	// the audit's summary rows of the round are replaced in bulk
	await exec('DELETE FROM audit_fields WHERE protocol_id = :p AND round = :r', { p: p.id, r: p.round }, t);
	await insertMany('audit_fields', AUDIT_FIELDS_COLUMNS, rows, t);
	await applyToDaily({ protocolId: p.id, round: p.round }, 1, t);
}

/**
 * Not drawn: check the single pass against the recomputation from its own raw scores, store the
 * findings as the round's discrepancies (all the first pass's) and move the protocol to review.
 */
export async function reconcileSinglePass(
	p: ProtocolRow,
	pass: { id: number; scorer_id: number; fields_entered: number; scores: Scores },
	actor: Actor,
	t: Transaction
) {
	const { input } = await engineInput(p, { first: pass.scores, second: pass.scores }, t);
	let result;
	try {
		result = singlePassFindings(reconcile(input));
	} catch (e) {
		if (e instanceof ReconcileInputError)
			throw new ServiceError(422, `The protocol cannot be checked: ${e.message}. Nothing was changed; ask a lead to check the catalog.`, undefined, 'catalog');
		throw e;
	}
	await storeDiscrepancies(p, result as Parameters<typeof storeDiscrepancies>[1], t);
	await recordSinglePass(p, pass, t);
	return result;
}

// ---------------------------------------------------------------- after reconciliation / resolution

/**
 * After a second pass was reconciled: a drawn (sampled) protocol whose first scorer shows a raw-score
 * error rate above T puts them back on full double entry at once; then both scorers' rolling record is
 * re-read.
 */
/**
 * What the second submit needs of verification, read once under the protocol's lock (so it cannot
 * change before the commit): the protocol's draw row and its battery's policy, both reads at once.
 */
export async function secondSubmitVerification(p: Pick<ProtocolRow, 'id' | 'battery_id'>, t: Transaction) {
	const { VerificationProtocol } = verificationModels();
	const [row, policy] = await Promise.all([VerificationProtocol.findByPk(p.id, { transaction: t }), getPolicy(p.battery_id, t)]);
	return { row, policy };
}
export type SecondSubmitVerification = Awaited<ReturnType<typeof secondSubmitVerification>>;

/** `read`: what `secondSubmitVerification` read in this transaction (else it is read here). */
export async function afterReconcile(p: ProtocolRow, t: Transaction, read?: SecondSubmitVerification) {
	const { row, policy } = read ?? (await secondSubmitVerification(p, t));
	if (row?.outcome === 'drawn') {
		await verificationModels().VerificationProtocol.update({ checked_at: new Date() }, { where: { protocol_id: p.id }, transaction: t });
		// COUNT over the protocol side's discrepancies
		const errors = await selectOne<{ n: number }>(
			`SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :p AND round = :r AND field = 'raw' AND pass IN ('first', 'both')`,
			{ p: p.id, r: p.round },
			t
		);
		const x = Number(errors?.n ?? 0);
		const n = Number(row.raw_fields ?? 0);
		const s = await standing(p.first_scorer_id, p.battery_id, t);
		if (s.mode === 'sampled' && protocolAboveThreshold(x, n, Number(row.policy?.thresholdPer100 ?? policy.thresholdPer100))) {
			const code = await models().Examinee.findByPk(p.examinee_id, { attributes: ['code'], transaction: t });
			await backToFull(
				p.first_scorer_id,
				p.battery_id,
				`sampled protocol ${code?.code ?? p.id}: ${x} raw-score discrepanc${x === 1 ? 'y' : 'ies'} in ${n} raw fields (${((x / Math.max(1, n)) * 100).toFixed(2)} per 100, above ${row.policy?.thresholdPer100 ?? policy.thresholdPer100})`,
				t
			);
		}
	}
	if (policy.mode === 'sampled') {
		await reassess(p.first_scorer_id, p.battery_id, t);
		await reassess(p.second_scorer_id, p.battery_id, t);
	}
}

/** A raw-score discrepancy was resolved: the scorers' rolling records changed. */
export async function afterResolution(discrepancyId: number, t: Transaction) {
	const { Discrepancy, Protocol } = models();
	const d = await Discrepancy.findByPk(discrepancyId, { attributes: ['field', 'protocol_id'], transaction: t });
	if (!d || d.field !== 'raw') return;
	const p = await Protocol.findByPk(d.protocol_id, { attributes: ['battery_id', 'first_scorer_id', 'second_scorer_id'], transaction: t });
	if (!p) return;
	const policy = await getPolicy(p.battery_id, t);
	if (policy.mode !== 'sampled') return;
	await reassess(p.first_scorer_id, p.battery_id, t);
	if (!(await isSinglePass(d.protocol_id, t))) await reassess(p.second_scorer_id, p.battery_id, t);
}

// ---------------------------------------------------------------- single pass: reading and guarding

export async function isSinglePass(protocolId: number, t?: Tx): Promise<boolean> {
	const { VerificationProtocol } = verificationModels();
	return (await reading(t, () => VerificationProtocol.count({ where: { protocol_id: protocolId, outcome: 'not_drawn' }, transaction: t ?? undefined }))) > 0;
}

export async function singlePassIds(ids: number[], t?: Tx): Promise<Set<number>> {
	if (ids.length === 0) return new Set();
	const { VerificationProtocol } = verificationModels();
	const rows = await reading(t, () =>
		// plain rows: read on every worklist and protocol list
		VerificationProtocol.findAll({ attributes: ['protocol_id'], where: { protocol_id: ids, outcome: 'not_drawn' }, transaction: t ?? undefined, raw: true })
	);
	return new Set(rows.map((r) => Number(r.protocol_id)));
}

/** The second pass of a single-pass protocol is closed. */
export async function guardSecondPass(p: ProtocolRow, t?: Tx, read?: SecondSubmitVerification) {
	if (read ? read.row?.outcome === 'not_drawn' : await isSinglePass(p.id, t))
		throw conflict(
			'This protocol was not drawn for a second pass: it goes to review as a single pass, and your second pass is no longer needed. Nothing was saved.'
		);
}

export const SINGLE_PASS_NOTE =
	'Single pass: entered once; derived scores checked against the recomputation from its raw scores; raw scores not double-entered.';

/**
 * What the protocol page shows. A scorer learns nothing before the first pass is submitted; leads
 * see the policy, a lead's requirement and the draw.
 */
export async function protocolVerification(p: ProtocolRow, duties: Duty[]) {
	const { VerificationProtocol } = verificationModels();
	const row = await VerificationProtocol.findByPk(p.id);
	const isLead = duties.includes('lead');
	const staff = isLead || duties.includes('reviewer');
	if (p.status === 'draft' && !isLead) return null;
	const outcome = row?.outcome ?? null;
	return {
		singlePass: outcome === 'not_drawn',
		outcome: staff || p.status !== 'draft' ? outcome : null,
		required: isLead && row?.required_by ? { at: row.required_at, reason: row.required_reason } : null,
		policy: isLead ? await getPolicy(p.battery_id) : null,
		canRequire: isLead && (p.status === 'draft' ? !row?.required_by : outcome === 'not_drawn' && p.status === 'in_review')
	};
}

/**
 * A lead requires a second pass for one protocol (forensic or high-stakes cases). Before the first
 * submission it is simply recorded (the scorer sees nothing); a single-pass protocol still in review
 * with nothing resolved goes back to waiting for its second pass.
 */
export async function requireSecondPass(protocolId: number, actor: Actor, reasonIn: unknown) {
	const reason = typeof reasonIn === 'string' ? reasonIn.trim() : '';
	if (reason.length < 5) throw invalid('Give a reason for requiring a second pass (at least a few words).', 'reason');
	if (reason.length > 500) throw invalid('The reason is too long (at most 500 characters).', 'reason');
	return transaction(async (t) => {
		// The protocol side's lock order (DEVELOPERS.md, "Transactions"): the round's discrepancy rows,
		// deleted below, before the protocol row, as a decision takes them; never the other way round.
		const seen = await protocolFor(protocolId, actor, t);
		if (!seen.duties.includes('lead')) throw notFound();
		if (seen.p.status === 'in_review')
			await models().Discrepancy.findAll({ attributes: ['id'], where: { protocol_id: seen.p.id, round: seen.p.round }, ...inTx(t, true) });
		const { p, duties } = await protocolFor(protocolId, actor, t, true);
		if (!duties.includes('lead')) throw notFound();
		const { VerificationProtocol } = verificationModels();
		const row = await VerificationProtocol.findByPk(p.id, { transaction: t, lock: t.LOCK.UPDATE });
		if (p.status === 'draft') {
			if (row?.required_by) throw conflict('A second pass is already required for this protocol.');
			await VerificationProtocol.upsert({ protocol_id: p.id, required_by: actor.id, required_at: new Date(), required_reason: reason }, { transaction: t });
			// not in the protocol's own history, which its scorers can read before they submit
			await recordEvent({ actorId: actor.id, entity: 'verification_protocol', entityId: p.id, action: 'require_second_pass', reason }, t);
			return { status: p.status };
		}
		if (row?.outcome !== 'not_drawn' || p.status !== 'in_review')
			throw conflict('This protocol already gets a second pass (or is signed off: reopen it first).');
		const { Discrepancy } = models();
		const round = { protocol_id: p.id, round: p.round };
		const resolved = await Discrepancy.count({ where: { ...round, resolved_at: { [Op.ne]: null } }, transaction: t });
		if (resolved > 0) throw conflict('The reviewer has already resolved findings of this single pass; a second pass can be required only before any decision.');
		await Discrepancy.destroy({ where: round, transaction: t });
		await applyToDaily({ protocolId: p.id, round: p.round }, -1, t);
		// the audit's row-level table, bulk delete of the round
		await exec('DELETE FROM audit_fields WHERE protocol_id = :p AND round = :r', { p: p.id, r: p.round }, t);
		// compare-and-set under the lock_version read with the row lock (the model's version)
		p.set({ status: 'awaiting_second', status_changed_at: dbNow() });
		await saveLocked(p, t, () => conflict('This protocol changed at the same moment elsewhere. Reload to see its state.'));
		await VerificationProtocol.update(
			{ outcome: 'required', required_by: actor.id, required_at: new Date(), required_reason: reason },
			{ where: { protocol_id: p.id }, transaction: t }
		);
		await recordEvent(
			{
				actorId: actor.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'require_second_pass',
				oldValue: { status: 'in_review', outcome: 'not_drawn' },
				newValue: { status: 'awaiting_second', outcome: 'required' },
				reason
			},
			t
		);
		return { status: 'awaiting_second' as const };
	});
}

// ---------------------------------------------------------------- the Audit screen

export interface ScorerRisk {
	scorerId: number;
	scorer: string;
	batteryId: number;
	battery: string;
	policy: SamplingPolicy;
	standing: Standing;
	qualification: Qualification & { from: Date };
	fieldsWithSecond: number;
	fieldsWithoutSecond: number;
	sampledProtocols: number;
	unsampledProtocols: number;
	undetected: ReturnType<typeof undetectedErrors>;
}

/** Per scorer × battery under a sampled policy (or with any standing or draw on record). */
export async function verificationAudit(): Promise<{ rows: ScorerRisk[]; policies: Array<BatteryPolicy & { name: string }> }> {
	const { Battery, User } = models();
	const batteries = await Battery.findAll({ attributes: ['id', 'name'], order: [['name', 'ASC']] });
	const policies = await Promise.all(batteries.map(async (b) => ({ ...(await getPolicy(b.id)), name: b.name })));
	// every scorer × battery on record: a UNION over two tables
	const pairs = await select<{ scorer_id: number; battery_id: number }>(
		`SELECT scorer_id, battery_id FROM verification_scorers
		 UNION SELECT scorer_id, battery_id FROM verification_protocols WHERE scorer_id IS NOT NULL AND outcome IN ('drawn', 'not_drawn', 'scorer_full')`
	);
	const names = new Map((await User.findAll({ attributes: ['id', 'name'] })).map((u) => [u.id, u.name]));
	const rows: ScorerRisk[] = [];
	for (const { scorer_id: s, battery_id: b } of pairs) {
		const policy = policies.find((x) => x.batteryId === Number(b));
		if (!policy) continue;
		const st = await standing(s, b);
		const q = await qualification(s, b, policy, st);
		// aggregates (SUM, COUNT): fields of double-entered rounds from the audit's own per-pass rows; single passes from their draw rows
		const withSecond = await selectOne<{ n: number | null }>(
			`SELECT SUM(a.fields_entered) AS n FROM audit_fields a WHERE a.scorer_id = :s AND a.battery_id = :b AND a.test_code = ''
			    AND NOT EXISTS (SELECT 1 FROM verification_protocols v WHERE v.protocol_id = a.protocol_id AND v.outcome = 'not_drawn')`,
			{ s, b }
		);
		const sample = await selectOne<{ protocols: number; fields: number | null }>(
			`SELECT COUNT(*) AS protocols, SUM(v.raw_fields) AS fields FROM verification_protocols v
			  WHERE v.scorer_id = :s AND v.battery_id = :b AND v.outcome = 'drawn' AND v.checked_at IS NOT NULL`,
			{ s, b }
		);
		const sampleErrors = await selectOne<{ n: number }>(
			`SELECT COUNT(*) AS n FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id AND p.round = d.round
			   JOIN verification_protocols v ON v.protocol_id = p.id AND v.outcome = 'drawn' AND v.scorer_id = :s AND v.battery_id = :b
			  WHERE d.field = 'raw' AND (
			        (d.resolved_at IS NULL AND d.pass IN ('first', 'both'))
			     OR EXISTS (SELECT 1 FROM error_events e WHERE e.discrepancy_id = d.id AND e.scorer_id = :s))`,
			{ s, b }
		);
		const unsampled = await selectOne<{ protocols: number; fields: number | null; all_fields: number | null }>(
			`SELECT COUNT(*) AS protocols, SUM(raw_fields) AS fields, SUM(fields_entered) AS all_fields FROM verification_protocols WHERE scorer_id = :s AND battery_id = :b AND outcome = 'not_drawn'`,
			{ s, b }
		);
		const n = Number(sample?.fields ?? 0);
		const x = Math.min(n, Number(sampleErrors?.n ?? 0));
		rows.push({
			scorerId: Number(s),
			scorer: names.get(Number(s)) ?? `#${s}`,
			batteryId: Number(b),
			battery: policy.name,
			policy,
			standing: st,
			qualification: q,
			fieldsWithSecond: Number(withSecond?.n ?? 0),
			fieldsWithoutSecond: Number(unsampled?.all_fields ?? 0),
			sampledProtocols: Number(sample?.protocols ?? 0),
			unsampledProtocols: Number(unsampled?.protocols ?? 0),
			undetected: undetectedErrors(x, n, Number(unsampled?.fields ?? 0))
		});
	}
	rows.sort((a, b) => a.scorer.localeCompare(b.scorer) || a.battery.localeCompare(b.battery));
	return { rows, policies };
}

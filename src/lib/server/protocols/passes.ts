/**
 * One scorer's pass: read it, save drafts (optimistic, never losing a keystroke to a stale tab),
 * submit it. The second submission reconciles both passes in the same transaction that stores the
 * discrepancies, moves the protocol to in_review and writes the reviewer's outbox e-mail.
 */
import type { Transaction } from 'sequelize';
import { z } from 'zod';
import { selectOne, transaction, jsonValue, pipeline, guardedInserts, markerStatement, IN_TX, type Piped, type Tx } from '../db';
import { recordEvent, recordEvents, trailRow, TRAIL_COLUMNS, type TrailEvent } from '../trail';
import { models } from '../models';
import { dbNow, inTx, reading, saveLocked, type Pass, type Protocol, type ProtocolRow, type Which } from '../models/protocol';
import { protocolFor, dutiesOf, type Actor } from './service';
import {
	protocolTests,
	protocolComposites,
	protocolNormGroups,
	normDef,
	engineTest,
	engineComposite,
	type CatalogTest,
	type CatalogComposite,
	type NormGroupRecord,
	type ProtocolTest
} from '../catalog';
import { reconcile, ReconcileInputError, type FieldValues, type ReconcileResult } from '../../scoring/reconcile';
import { formatReference, type Field } from '../../scoring/scales';
import { conflict, invalid, notFound, parseFirst, ServiceError } from '../errors';
import { notifyReviewStarted, reviewStartedMail } from '../mail/reminders/scheduling';
import { outboxInsert, outboxWritten } from '../mail/outbox';
import { submissionWrites, roundRecorded, testDomains } from '../audit-stats/record';
import { decideAtFirstSubmit, reconcileSinglePass, afterReconcile, guardSecondPass, secondSubmitVerification } from '../verification';

export type { Which };
export type Scores = Record<string, Partial<Record<Field, string | null>>>;

const value = z.union([z.string().max(12, 'at most 12 characters'), z.number(), z.null()]).transform((v) => (v === null ? null : String(v).trim() || null));
const scoresSchema = z.record(z.string().max(40), z.record(z.string(), value));
export const draftSchema = z.object({ scores: scoresSchema, draftVersion: z.number().int().min(0) });

/** Keep only the test's raw score and the derived fields it reports (a composite: its reported fields, sum included); count what was entered. */
export function cleanScores(raw: unknown, tests: CatalogTest[], composites: CatalogComposite[] = []): { scores: Scores; entered: number } {
	const scores = parseFirst(scoresSchema, raw, { prefix: 'scores', field: 'scores' });
	const out: Scores = {};
	let entered = 0;
	for (const [code, fields] of Object.entries(scores)) {
		const test = tests.find((t) => t.code === code);
		const composite = test ? undefined : composites.find((c) => c.code === code);
		if (!test && !composite) throw invalid(`scores.${code}: this protocol has no such test or composite`, 'scores');
		const allowed = (test ? ['raw', ...test.reported] : composite!.reported) as Field[];
		const name = test?.name ?? composite!.name;
		for (const k of Object.keys(fields)) if (!allowed.includes(k as Field)) throw invalid(`scores.${code}.${k}: ${name} does not report this field`, 'scores');
		out[code] = {};
		for (const f of allowed) {
			const v = fields[f] ?? null;
			out[code][f] = v;
			if (v !== null) entered++;
		}
	}
	return { scores: out, entered };
}

function myDuty(duties: string[]): Which {
	if (duties.includes('first')) return 'first';
	if (duties.includes('second')) return 'second';
	throw notFound();
}

async function passRow(p: Pick<ProtocolRow, 'id' | 'round'>, which: Which, t?: Tx, forUpdate = false): Promise<Pass> {
	const { Pass } = models();
	const row = await reading(t, () => Pass.findOne({ where: { protocol_id: p.id, round: p.round, which }, ...inTx(t, forUpdate) }));
	if (!row) throw notFound('This pass');
	return row;
}

/** The caller's own pass (never the other one) with what the entry form needs. */
export async function myPass(protocolId: number, user: Actor) {
	const { p, duties } = await protocolFor(protocolId, user);
	const which = myDuty(duties);
	const pass = await passRow(p, which);
	if (pass.scorer_id !== user.id) throw notFound('This pass');
	const tests = await protocolTests(p.id);
	const composites = await protocolComposites(p.id);
	return {
		protocol: p.get({ plain: true }) as ProtocolRow,
		which,
		composites,
		status: pass.status,
		scores: (jsonValue<Scores>(pass.scores) ?? {}) as Scores,
		draftVersion: pass.draft_version,
		submittedAt: pass.submitted_at,
		updatedAt: pass.updated_at,
		tests
	};
}

/** The Entry page: the caller's own pass and only what a scorer needs to look scores up (never norms, references or the other pass). */
export async function entryView(protocolId: number, user: Actor) {
	const pass = await myPass(protocolId, user);
	const ex = await reading(null, () => models().Examinee.findByPk(pass.protocol.examinee_id, { attributes: ['code'] }));
	// batteries is a catalog table (its model belongs to the catalog services)
	const battery = await selectOne<{ name: string }>('SELECT name FROM batteries WHERE id = :id', { id: pass.protocol.battery_id });
	return {
		protocol: {
			id: pass.protocol.id,
			code: ex!.code,
			testDate: pass.protocol.test_date,
			age: pass.protocol.age_text,
			status: pass.protocol.status,
			battery: battery!.name
		},
		which: pass.which,
		status: pass.status,
		scores: pass.scores,
		draftVersion: pass.draftVersion,
		submittedAt: pass.submittedAt,
		// percentileOnly: the norm gives percentile bands (typed as the manual writes them), not a reference
		tests: pass.tests.map((t) => ({
			code: t.code,
			name: t.name,
			domain: t.domainName,
			unit: t.unit,
			direction: t.direction,
			group: t.groupText,
			raw: t.raw,
			bounds: t.bounds,
			reported: t.reported,
			percentileOnly: t.normScale === 'percentile'
		})),
		composites: pass.composites.map((c) => ({
			code: c.code,
			name: c.name,
			parts: c.parts,
			partField: c.part_field,
			reported: c.reported,
			group: c.groupText
		}))
	};
}

export async function saveDraft(protocolId: number, user: Actor, body: unknown) {
	const draft = parseFirst(draftSchema, body);
	return transaction(async (t) => {
		const { p, duties } = await protocolFor(protocolId, user, t);
		const which = myDuty(duties);
		const pass = await passRow(p, which, t, true);
		if (pass.scorer_id !== user.id) throw notFound('This pass');
		if (pass.status === 'submitted') throw conflict('This pass is submitted and locked; the draft was not changed.');
		if (which === 'second') await guardSecondPass(p, t);
		if (pass.draft_version !== draft.draftVersion) {
			throw new ServiceError(
				409,
				'This pass was saved from another tab or device since you opened it. Reload to see the latest draft.',
				'draftVersion',
				'stale_draft'
			);
		}
		const tests = await protocolTests(p.id, t);
		const { scores, entered } = cleanScores(draft.scores, tests, await protocolComposites(p.id, t));
		// the pass row is locked FOR UPDATE and its draft_version was compared above
		const next = pass.draft_version + 1;
		await pass.update({ scores, fields_entered: entered, draft_version: next }, { transaction: t });
		return { draftVersion: next, fieldsEntered: entered };
	});
}

/** What the engine needs of the catalog for one protocol: its frozen tests and composites and every group of them in its norm set. */
export interface ProtocolPlan {
	tests: ProtocolTest[];
	composites: CatalogComposite[];
	groups: NormGroupRecord[];
}

/** The protocol's plan, read at once (three reads, no one waiting on another). */
export async function protocolPlan(p: Pick<ProtocolRow, 'id' | 'norm_set_id'>, t?: Tx): Promise<ProtocolPlan> {
	const [tests, composites, groups] = await Promise.all([protocolTests(p.id, t), protocolComposites(p.id, t), protocolNormGroups(p.id, p.norm_set_id, t)]);
	return { tests, composites, groups };
}

/** Build the engine's input from the stored protocol and passes (`plan`: the protocol's plan, when already read). */
export async function engineInput(
	p: Pick<ProtocolRow, 'id' | 'norm_set_id' | 'covariates'>,
	passes: { first: Scores; second: Scores },
	t?: Tx,
	plan?: ProtocolPlan
) {
	// every group of each test and composite, so a value from another band is named wrong_norm_group
	const { tests, composites, groups } = plan ?? (await protocolPlan(p, t));
	const protocolGroups: Record<string, string> = {};
	for (const x of [...tests, ...composites]) if (x.groupCode) protocolGroups[x.code] = x.groupCode;
	const toEngine = (s: Scores) => {
		const out: Record<string, FieldValues> = {};
		for (const x of [...tests, ...composites]) out[x.code] = (s[x.code] ?? {}) as FieldValues;
		return out;
	};
	const covariates = jsonValue<Record<string, number> | null>(p.covariates ?? null);
	return {
		tests,
		composites,
		input: {
			tests: tests.map(engineTest),
			norms: groups.map(normDef),
			...(composites.length ? { composites: composites.map(engineComposite) } : {}),
			protocol: { group: tests[0]?.groupCode ?? '', groups: protocolGroups, ...(covariates ? { covariates } : {}) },
			passes: [
				{ scorer: 'first', scores: toEngine(passes.first) },
				{ scorer: 'second', scores: toEngine(passes.second) }
			]
		}
	};
}

/** A discrepancy's `alternative` at its field's precision, or null. */
function altOf(d: ReconcileResult['discrepancies'][number]): string | null {
	const a = d.alternative;
	if (a === null || a === undefined || d.field === 'raw') return null;
	return formatReference(d.field, a);
}

/** The columns a reconciliation writes of a discrepancy, in the order of `discrepancyValues`. */
export const DISCREPANCY_COLUMNS = [
	'protocol_id',
	'round',
	'position',
	'test_code',
	'field',
	'pass',
	'kind',
	'value',
	'other',
	'expected',
	'alternative',
	'out_of_range'
] as const;

/**
 * A reconciler's discrepancy as the values of `DISCREPANCY_COLUMNS`, at `position` (from 1) in its round's
 * list. The second submit writes them; so does the bench's seed (scripts/bench/audit-seed.ts).
 */
export function discrepancyValues(p: Pick<ProtocolRow, 'id' | 'round'>, position: number, d: ReconcileResult['discrepancies'][number]): unknown[] {
	return [
		p.id,
		p.round,
		position,
		// a composite's discrepancy carries `composite` instead of `test`; codes are unique across both
		(d as { test?: string; composite?: string }).test ?? (d as { composite?: string }).composite,
		d.field,
		d.pass,
		d.kind,
		d.value === null ? null : String(d.value),
		d.other === null ? null : String(d.other),
		// written at the field's precision (z as 1.00), as a reviewer keeps it
		d.expected === null ? null : d.field === 'raw' ? String(d.expected) : formatReference(d.field, d.expected),
		// rule 5: the reference from the other pass's raw score (null where the rule gives none)
		altOf(d),
		d.out_of_range ? 1 : 0
	];
}

/**
 * A reconciliation result as the round's discrepancy list: multi-row INSERTs of up to 500 rows (not one
 * per row) in raw SQL — the hot path of the second submit, where bulkCreate's per-row instances and
 * validation cost more than the statement (the kind list and the empty decision are CHECKed by the
 * table). Guarded (`IN_TX` in ../db), so the statements may follow another in a `pipeline`.
 */
function discrepancyInserts(p: Pick<ProtocolRow, 'id' | 'round'>, result: ReconcileResult): Piped[] {
	return guardedInserts(
		'discrepancies',
		DISCREPANCY_COLUMNS,
		'protocol_id',
		result.discrepancies.map((d, i) => discrepancyValues(p, i + 1, d))
	);
}

/** Store a reconciliation result as the round's discrepancy list (`discrepancyInserts`, in one round trip). */
export async function storeDiscrepancies(p: Pick<ProtocolRow, 'id' | 'round'>, result: ReconcileResult, t: Transaction) {
	const statements = discrepancyInserts(p, result);
	if (statements.length) await pipeline(t, statements);
}

/** The reconciliation is stored: the protocol goes to review, and the trail says so with the counts (after `before`, in one INSERT). */
async function enterReview(p: Protocol, user: Actor, summary: Record<string, unknown>, t: Transaction, before: TrailEvent[] = []): Promise<void> {
	const from = await moveProtocol(p, 'in_review', t);
	await recordEvents(
		[
			...before,
			{
				actorId: user.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'reconcile',
				oldValue: from,
				newValue: { status: 'in_review', round: p.round, ...summary }
			}
		],
		t
	);
}

/**
 * Compare-and-set of the protocol's status: saved under the lock_version this transaction read (every
 * change of status or round moves it), so it moves only from the state it was read in. Returns the
 * status it moved from.
 */
async function moveProtocol(p: Protocol, to: ProtocolRow['status'], t: Transaction): Promise<ProtocolRow['status']> {
	const from = p.status;
	p.set({ status: to, status_changed_at: dbNow() });
	await saveLocked(p, t, protocolMoved);
	return from;
}

const protocolMoved = () =>
	new ServiceError(
		409,
		'This protocol changed while the pass was being submitted (another submission got there first). Nothing was changed; reload to see its state.',
		undefined,
		'already_submitted'
	);

export type SubmitResult = { which: Which; status: ProtocolRow['status']; discrepancies: number | null; singlePass?: boolean };

export async function submitPass(protocolId: number, user: Actor, body: unknown): Promise<SubmitResult> {
	const version = z.object({ draftVersion: z.number().int().min(0) }).safeParse(body);
	if (!version.success) throw invalid('draftVersion: expected the draft version you are submitting', 'draftVersion');
	return transaction(async (t) => {
		// Locking the protocol row serializes submissions of both passes (two tabs, a retry, both scorers
		// at once). Sent with it, run once the lock is held (one round trip, issue 18): the mark of a
		// second submit, the once-only check — only the caller's own second pass, a draft of the version
		// they saw, moves (on a Galera cluster a submission of the same pass through another node is stopped
		// here, or by the certification conflict at commit — 1213, retried by transaction(): the rerun finds
		// it submitted and answers 409). For anyone else it matches no row; any refusal below throws, so
		// the mark rolls back with the rest.
		const [rows, mark] = (await pipeline(t, [
			{ sql: 'SELECT * FROM protocols WHERE id = ? FOR UPDATE', values: [protocolId] },
			{
				sql: `UPDATE passes SET status = 'submitted', submitted_at = CURRENT_TIMESTAMP(3)
				       WHERE protocol_id = ? AND round = (SELECT round FROM protocols WHERE id = ?) AND which = 'second' AND scorer_id = ?
				         AND status = 'draft' AND draft_version = ? AND ${IN_TX}`,
				values: [protocolId, protocolId, user.id, version.data.draftVersion]
			}
		])) as [ProtocolRow[], { affectedRows: number }];
		// the model instance, as findByPk builds it, so the first submit can save it under its lock_version
		const p = rows[0] ? models().Protocol.build(rows[0], { raw: true, isNewRecord: false }) : null;
		const duties = p ? dutiesOf(p, user) : [];
		if (!p || duties.length === 0) throw notFound();
		const which = myDuty(duties);
		if (which === 'second') return submitSecond(p, user, version.data.draftVersion, mark.affectedRows, t);
		const pass = await passRow(p, which, t, true);
		if (pass.scorer_id !== user.id) throw notFound('This pass');
		if (pass.status === 'submitted') throw alreadySubmitted();
		if (pass.draft_version !== version.data.draftVersion) throw staleDraft();
		// Once only, checked again at the write: on a Galera cluster the FOR UPDATE above locks only on
		// this node, so a submission of the same pass through another node is stopped here (the row is
		// no longer a draft of this version) or by the certification conflict at commit (1213, retried
		// by transaction(): the rerun reads 'submitted' and answers 409).
		const [marked] = await models().Pass.update(
			{ status: 'submitted', submitted_at: dbNow() },
			{ where: { id: pass.id, status: 'draft', draft_version: pass.draft_version }, transaction: t }
		);
		if (marked !== 1) throw alreadySubmitted();
		await recordEvent(submitEvent(p, pass, user, which), t);

		// Risk-based verification: the draw is made here, at the submission, never before.
		const scores = jsonValue<Scores>(pass.scores) ?? {};
		const outcome = await decideAtFirstSubmit(p, scores, pass.fields_entered, user, t);
		if (outcome === 'not_drawn') {
			const single = await reconcileSinglePass(p, { id: pass.id, scorer_id: pass.scorer_id, fields_entered: pass.fields_entered, scores }, user, t);
			await enterReview(p, user, { single_pass: true, ...single.summary }, t);
			await notifyReviewStarted(p.id, p.round, p.reviewer_id, t);
			return { which, status: 'in_review' as const, discrepancies: single.discrepancies.length, singlePass: true };
		}
		const from = await moveProtocol(p, 'awaiting_second', t);
		await recordEvent(
			{ actorId: user.id, entity: 'protocol', entityId: p.id, protocolId: p.id, action: 'status', oldValue: from, newValue: 'awaiting_second' },
			t
		);
		return { which, status: 'awaiting_second' as const, discrepancies: null };
	});
}

const alreadySubmitted = () =>
	new ServiceError(409, 'This pass was already submitted (from another tab or an earlier try). Nothing was changed.', undefined, 'already_submitted');
const staleDraft = () =>
	new ServiceError(409, 'This pass changed in another tab since you opened it. Reload, check the values and submit again.', 'draftVersion', 'stale_draft');

const submitEvent = (p: Protocol, pass: Pass, user: Actor, which: Which): TrailEvent => ({
	actorId: user.id,
	entity: 'pass',
	entityId: pass.id,
	protocolId: p.id,
	action: `submit_${which}`,
	newValue: { round: p.round, fields: pass.fields_entered, scores: jsonValue(pass.scores) }
});

/**
 * The second submission, in the transaction that locked the protocol row: the reconciliation. Its
 * statements are few on purpose (issue 18: the time is the round trips): the pass was marked by one
 * UPDATE that is also the once-only check (`marked`: the rows it moved; sent by submitPass with the
 * protocol's lock), everything else it reads is read at once under the protocol's lock, and all its
 * writes (protocol, discrepancies, the trail's two events, the audit's rows and sums, the outbox row,
 * the commit marker) go in one `pipeline`. Any refusal throws, so the mark rolls back with the rest.
 */
async function submitSecond(p: Protocol, user: Actor, draftVersion: number, marked: number, t: Transaction): Promise<SubmitResult> {
	const { Pass } = models();
	// the pure reads, sent together (one round trip): no write is in flight while they run, so were
	// one to fail, nothing could run outside the transaction after a rollback
	const [passes, verification, earlier, plan, domains] = await Promise.all([
		Pass.findAll({ where: { protocol_id: p.id, round: p.round }, ...inTx(t, true) }),
		secondSubmitVerification(p, t),
		roundRecorded(p.id, p.round, t),
		protocolPlan(p, t),
		testDomains(p.id, t)
	]);
	const pass = passes.find((x) => x.which === 'second');
	if (!pass || pass.scorer_id !== user.id) throw notFound('This pass');
	if (marked !== 1) throw pass.status === 'draft' && pass.draft_version !== draftVersion ? staleDraft() : alreadySubmitted();
	await guardSecondPass(p, t, verification);
	if (p.status === 'draft') {
		throw conflict('The first pass has not been submitted yet. Your draft is saved; submit once the first scorer has submitted.');
	}
	const first = passes.find((x) => x.which === 'first');
	if (!first) throw notFound('This pass');
	if (first.status !== 'submitted') throw conflict('The first pass has not been submitted yet.');
	const { input } = await engineInput(p, { first: jsonValue<Scores>(first.scores) ?? {}, second: jsonValue<Scores>(pass.scores) ?? {} }, t, plan);
	let result: ReconcileResult;
	try {
		result = reconcile(input);
	} catch (e) {
		if (e instanceof ReconcileInputError)
			throw new ServiceError(
				422,
				`The protocol cannot be reconciled: ${e.message}. Nothing was changed; ask a lead to check the catalog.`,
				undefined,
				'catalog'
			);
		throw e;
	}
	// Every write of the reconciliation, sent at once (one round trip): the protocol's compare-and-set
	// to review (under the lock_version this transaction read; every change of status or round moves
	// it), the discrepancies, the trail's two events, the audit's rows and `_delta` appends
	// (`submissionWrites`, from the reads above), the reviewer's outbox row and the commit marker.
	// Each after the first is guarded by IN_TX (db.ts); a refusal decided from the answers throws.
	const events = [
		submitEvent(p, pass, user, 'second'),
		{
			actorId: user.id,
			entity: 'protocol',
			entityId: p.id,
			protocolId: p.id,
			action: 'reconcile',
			oldValue: p.status,
			newValue: { status: 'in_review', round: p.round, ...result.summary }
		}
	].map(trailRow);
	const mail = reviewStartedMail(p.id, p.round, p.reviewer_id);
	const answers = (await pipeline(t, [
		{
			sql: `UPDATE protocols SET status = 'in_review', status_changed_at = CURRENT_TIMESTAMP(3), lock_version = lock_version + 1 WHERE id = ? AND lock_version = ?`,
			values: [p.id, p.lock_version]
		},
		...discrepancyInserts(p, result),
		...guardedInserts(
			'audit_events',
			TRAIL_COLUMNS,
			'entity',
			events.map((e) => TRAIL_COLUMNS.map((c) => e[c]))
		),
		...submissionWrites(p.id, p.round, { passes: [first, pass], batteryId: p.battery_id, earlier, domains }),
		outboxInsert(mail.kind, mail.key, mail.payload),
		markerStatement(t)
	])) as Array<{ affectedRows: number }>;
	if (answers[0].affectedRows !== 1) throw protocolMoved();
	// the outbox row's answer is the one before the marker's
	outboxWritten(t, answers[answers.length - 2].affectedRows);
	// reads and writes only when the protocol was drawn or the policy samples (verification/)
	await afterReconcile(p, t, verification);
	return { which: 'second', status: 'in_review' as const, discrepancies: result.discrepancies.length };
}

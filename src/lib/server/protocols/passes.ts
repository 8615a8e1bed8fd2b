/**
 * One scorer's pass: read it, save drafts (optimistic, never losing a keystroke to a stale tab),
 * submit it. The second submission reconciles both passes in the same transaction that stores the
 * discrepancies, moves the protocol to in_review and writes the reviewer's outbox e-mail.
 */
import { z } from 'zod';
import { selectOne, exec, transaction, jsonValue, type Tx } from '../db';
import { recordEvent } from '../trail';
import { protocolFor, type Actor, type ProtocolRow } from './service';
import { protocolTests, protocolComposites, normGroups, normDef, engineTest, engineComposite, type CatalogTest, type CatalogComposite } from './catalog-read';
import { reconcile, ReconcileInputError, type FieldValues, type ReconcileResult } from '../../scoring/reconcile';
import { formatReference, type Field } from '../../scoring/scales';
import { conflict, invalid, notFound, parseFirst, ServiceError } from '../errors';
import { notifyReviewStarted } from '../mail/review';
import { recordSubmission } from '../audit-stats/record';
import { decideAtFirstSubmit, reconcileSinglePass, afterReconcile, guardSecondPass } from '../verification';

export type Which = 'first' | 'second';
export type Scores = Record<string, Partial<Record<Field, string | null>>>;

interface PassRow {
	id: number;
	protocol_id: number;
	round: number;
	which: Which;
	scorer_id: number;
	status: 'draft' | 'submitted';
	scores: unknown;
	fields_entered: number;
	draft_version: number;
	submitted_at: Date | null;
	updated_at: Date;
}

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

async function passRow(p: ProtocolRow, which: Which, t?: Tx, forUpdate = false): Promise<PassRow> {
	const row = await selectOne<PassRow>(
		`SELECT * FROM passes WHERE protocol_id = :p AND round = :r AND which = :w${forUpdate ? ' FOR UPDATE' : ''}`,
		{ p: p.id, r: p.round, w: which },
		t
	);
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
		protocol: p,
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
		await exec(
			'UPDATE passes SET scores = :scores, fields_entered = :entered, draft_version = draft_version + 1 WHERE id = :id',
			{ scores: JSON.stringify(scores), entered, id: pass.id },
			t
		);
		return { draftVersion: pass.draft_version + 1, fieldsEntered: entered };
	});
}

/** Build the engine's input from the stored protocol and passes. */
export async function engineInput(p: ProtocolRow, passes: { first: Scores; second: Scores }, t?: Tx) {
	const tests = await protocolTests(p.id, t);
	const composites = await protocolComposites(p.id, t);
	// every group of each test and composite, so a value from another band is named wrong_norm_group
	const groups = await normGroups(p.norm_set_id, [...tests.map((x) => x.code), ...composites.map((c) => c.code)], t);
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

/** Store a reconciliation result as the round's discrepancy list: one multi-row INSERT (not one per row). */
export async function storeDiscrepancies(p: ProtocolRow, result: ReconcileResult, t: Tx) {
	const CHUNK = 500;
	for (let from = 0; from < result.discrepancies.length; from += CHUNK) {
		const params: Record<string, unknown> = { p: p.id, round: p.round };
		const rows = result.discrepancies.slice(from, from + CHUNK).map((d, j) => {
			const i = from + j;
			Object.assign(params, {
				[`pos${i}`]: i + 1,
				// a composite's discrepancy carries `composite` instead of `test`; codes are unique across both
				[`test${i}`]: (d as { test?: string; composite?: string }).test ?? (d as { composite?: string }).composite,
				[`field${i}`]: d.field,
				[`pass${i}`]: d.pass,
				[`kind${i}`]: d.kind,
				[`value${i}`]: d.value === null ? null : String(d.value),
				[`other${i}`]: d.other === null ? null : String(d.other),
				// written at the field's precision (z as 1.00), as a reviewer keeps it
				[`expected${i}`]: d.expected === null ? null : d.field === 'raw' ? String(d.expected) : formatReference(d.field, d.expected),
				// rule 5: the reference from the other pass's raw score (null where the rule gives none)
				[`alt${i}`]: altOf(d),
				[`oor${i}`]: d.out_of_range ? 1 : 0
			});
			return `(:p, :round, :pos${i}, :test${i}, :field${i}, :pass${i}, :kind${i}, :value${i}, :other${i}, :expected${i}, :alt${i}, :oor${i})`;
		});
		await exec(
			`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected, alternative, out_of_range) VALUES ${rows.join(', ')}`,
			params,
			t
		);
	}
}

/** Compare-and-set of the protocol's status: moves only from the state and version this transaction read. */
async function moveProtocol(p: ProtocolRow, to: ProtocolRow['status'], t: Tx) {
	const moved = await exec(
		`UPDATE protocols SET status = :to, status_changed_at = CURRENT_TIMESTAMP(3), lock_version = lock_version + 1 WHERE id = :id AND status = :from AND round = :round AND lock_version = :lock`,
		{ to, id: p.id, from: p.status, round: p.round, lock: p.lock_version },
		t
	);
	if (moved.affected !== 1)
		throw new ServiceError(
			409,
			'This protocol changed while the pass was being submitted (another submission got there first). Nothing was changed; reload to see its state.',
			undefined,
			'already_submitted'
		);
}

export type SubmitResult = { which: Which; status: ProtocolRow['status']; discrepancies: number | null; singlePass?: boolean };

export async function submitPass(protocolId: number, user: Actor, body: unknown): Promise<SubmitResult> {
	const version = z.object({ draftVersion: z.number().int().min(0) }).safeParse(body);
	if (!version.success) throw invalid('draftVersion: expected the draft version you are submitting', 'draftVersion');
	return transaction(async (t) => {
		// Locking the protocol row serializes submissions of both passes (two tabs, a retry, both scorers at once).
		const { p, duties } = await protocolFor(protocolId, user, t, true);
		const which = myDuty(duties);
		const pass = await passRow(p, which, t, true);
		if (pass.scorer_id !== user.id) throw notFound('This pass');
		if (pass.status === 'submitted')
			throw new ServiceError(409, 'This pass was already submitted (from another tab or an earlier try). Nothing was changed.', undefined, 'already_submitted');
		if (pass.draft_version !== version.data.draftVersion) {
			throw new ServiceError(
				409,
				'This pass changed in another tab since you opened it. Reload, check the values and submit again.',
				'draftVersion',
				'stale_draft'
			);
		}
		if (which === 'second') await guardSecondPass(p, t);
		if (which === 'second' && p.status === 'draft') {
			throw conflict('The first pass has not been submitted yet. Your draft is saved; submit once the first scorer has submitted.');
		}
		// Once only, checked again at the write: on a Galera cluster the FOR UPDATE above locks only on
		// this node, so a submission of the same pass through another node is stopped here (the row is
		// no longer a draft of this version) or by the certification conflict at commit (1213, retried
		// by transaction(): the rerun reads 'submitted' and answers 409).
		const marked = await exec(
			`UPDATE passes SET status = 'submitted', submitted_at = CURRENT_TIMESTAMP(3) WHERE id = :id AND status = 'draft' AND draft_version = :v`,
			{ id: pass.id, v: pass.draft_version },
			t
		);
		if (marked.affected !== 1)
			throw new ServiceError(409, 'This pass was already submitted (from another tab or an earlier try). Nothing was changed.', undefined, 'already_submitted');
		await recordEvent(
			{
				actorId: user.id,
				entity: 'pass',
				entityId: pass.id,
				protocolId: p.id,
				action: `submit_${which}`,
				newValue: { round: p.round, fields: pass.fields_entered, scores: jsonValue(pass.scores) }
			},
			t
		);

		if (which === 'first') {
			// Risk-based verification: the draw is made here, at the submission, never before.
			const scores = jsonValue<Scores>(pass.scores) ?? {};
			const outcome = await decideAtFirstSubmit(p, scores, pass.fields_entered, user, t);
			if (outcome === 'not_drawn') {
				const single = await reconcileSinglePass(p, { id: pass.id, scorer_id: pass.scorer_id, fields_entered: pass.fields_entered, scores }, user, t);
				await moveProtocol(p, 'in_review', t);
				await recordEvent(
					{
						actorId: user.id,
						entity: 'protocol',
						entityId: p.id,
						protocolId: p.id,
						action: 'reconcile',
						oldValue: p.status,
						newValue: { status: 'in_review', round: p.round, single_pass: true, ...single.summary }
					},
					t
				);
				await notifyReviewStarted(p.id, p.round, p.reviewer_id, t);
				return { which, status: 'in_review' as const, discrepancies: single.discrepancies.length, singlePass: true };
			}
			await moveProtocol(p, 'awaiting_second', t);
			await recordEvent(
				{ actorId: user.id, entity: 'protocol', entityId: p.id, protocolId: p.id, action: 'status', oldValue: p.status, newValue: 'awaiting_second' },
				t
			);
			return { which, status: 'awaiting_second' as const, discrepancies: null };
		}

		const first = await passRow(p, 'first', t, true);
		if (first.status !== 'submitted') throw conflict('The first pass has not been submitted yet.');
		const { input } = await engineInput(p, { first: jsonValue<Scores>(first.scores) ?? {}, second: jsonValue<Scores>(pass.scores) ?? {} }, t);
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
		await storeDiscrepancies(p, result, t);
		await moveProtocol(p, 'in_review', t);
		await recordEvent(
			{
				actorId: user.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'reconcile',
				oldValue: p.status,
				newValue: { status: 'in_review', round: p.round, ...result.summary }
			},
			t
		);
		await recordSubmission(p.id, p.round, t);
		await afterReconcile(p, t);
		await notifyReviewStarted(p.id, p.round, p.reviewer_id, t);
		return { which, status: 'in_review' as const, discrepancies: result.discrepancies.length };
	});
}

/**
 * Amendment of a verified protocol (product.md, Amendment): one field corrected with a reason. A lead
 * makes it (applied at once); a reviewer requests it and a lead approves (applied) or refuses it.
 *
 * Applying opens a new review round in which every earlier decision stands (copied with its
 * resolution) except the amended field and what depends on it: the field itself is open again with
 * the amended value offered as the default, and for a raw score the test's derived scores wait on
 * that raw decision and are judged again against it (evidence.ts). The audit trail holds the value
 * before and after; the Summary lists the amendment with its date, reason and who made it.
 */
import { z } from 'zod';
import type { Transaction } from 'sequelize';
import { select, exec, transaction } from '../db';
import { recordEvent } from '../trail';
import { models } from '../models';
import { dbNow, saveLocked, type Protocol } from '../models/protocol';
import { protocolFor, type Actor } from './service';
import { protocolTests } from '../catalog';
import { carryPasses, finalScores } from './decisions';
import { referencesForRaw, kindAgainst } from './evidence';
import { conflict, invalid, notFound, parseFirst, ServiceError } from '../errors';
import { amendments, type Amendment } from '../models/amendment';
import { checkField, classifyPair } from '../../scoring/reconcile';
import { parseEntered, formatReference, FIELDS, type DerivedField, type Field } from '../../scoring/scales';
import { FIELD_LABELS } from '../../status';
import type { Kind } from '../../scoring/kinds';
// A static import on purpose: the production bundler (Rolldown in Vite 8.3.8) dropped the `why` argument
// of this call when it was reached through a dynamic import(), so reopen and amendment e-mails lost
// their round and reason (tests/integration/review-evidence.test.ts, against the built app).
import { notifyReviewStarted } from '../mail/reminders/scheduling';

const amendSchema = z.object({
	test: z.string().trim().min(1, 'Choose the test').max(40),
	field: z.enum(FIELDS as unknown as [Field, ...Field[]], { error: 'field: one of raw, z, standard, scaled, t, percentile' }),
	value: z
		.union([z.string(), z.number()])
		.transform((v) => String(v).trim())
		.pipe(z.string().min(1, 'Enter the corrected value').max(12, 'at most 12 characters')),
	reason: z.string().trim().min(5, 'Give a reason for the amendment (at least a few words)').max(2000)
});

const decisionSchema = z.object({
	decision: z.enum(['approve', 'refuse'], { error: 'decision: approve or refuse' }),
	note: z.string().trim().max(2000).optional().nullable()
});

function parse<T>(schema: z.ZodType<T>, body: unknown): T {
	return parseFirst(schema, body);
}

const same = (a: string | null | undefined, b: string | null | undefined, f: Field) => {
	const x = parseEntered(a ?? null, f);
	const y = parseEntered(b ?? null, f);
	return x !== null && y !== null && !Number.isNaN(x) && !Number.isNaN(y) ? Math.abs(x - y) < 1e-9 : (a ?? null) === (b ?? null);
};

/** A lead amends (applied now) or a reviewer requests an amendment (waits for a lead). */
export async function proposeAmendment(protocolId: number, user: Actor, body: unknown) {
	const input = parse(amendSchema, body);
	return transaction(async (t) => {
		const { p, duties } = await protocolFor(protocolId, user, t, true);
		const isLead = duties.includes('lead');
		if (!isLead && !duties.includes('reviewer')) throw notFound();
		if (p.status !== 'verified') throw conflict('Only a verified protocol can be amended; while it is in review, change the decision on the Review screen.');
		const tests = await protocolTests(p.id, t);
		const test = tests.find((x) => x.code === input.test);
		if (!test) throw invalid(`test: this protocol has no test ${input.test}`, 'test');
		if (input.field !== 'raw' && !test.reported.includes(input.field as DerivedField))
			throw invalid(`field: ${test.name} does not report the ${FIELD_LABELS[input.field]}`, 'field');
		const problems = checkField(test, input.field, input.value);
		if (problems.length) throw invalid(`value: ${problems[0].message}`, 'value');
		const old = (await finalScores(p.id, p.round, t))[test.code]?.[input.field] ?? null;
		if (same(old, input.value, input.field))
			throw invalid(`value: ${input.value} is already the verified ${FIELD_LABELS[input.field]} of ${test.name}`, 'value');
		const pending = await amendments().findOne({ where: { protocol_id: p.id, status: 'requested' }, transaction: t });
		if (pending && !isLead) throw conflict('An amendment of this protocol is already waiting for a lead’s approval.');
		const a = await amendments().create(
			{
				protocol_id: p.id,
				from_round: p.round,
				test_code: test.code,
				field: input.field,
				old_value: old,
				new_value: input.value,
				reason: input.reason,
				status: 'requested',
				requested_by: user.id
			},
			{ transaction: t }
		);
		await recordEvent(
			{
				actorId: user.id,
				entity: 'amendment',
				entityId: a.id,
				protocolId: p.id,
				action: 'amendment_requested',
				oldValue: { test: test.code, field: input.field, value: old },
				newValue: { test: test.code, field: input.field, value: input.value },
				reason: input.reason
			},
			t
		);
		if (!isLead) return { id: a.id, status: 'requested' as const, round: null };
		const round = await apply(p, a, user, t, null);
		return { id: a.id, status: 'applied' as const, round };
	});
}

/** A lead approves (applies) or refuses a reviewer's request. */
export async function decideAmendment(amendmentId: number, user: Actor, body: unknown) {
	const input = parse(decisionSchema, body);
	return transaction(async (t) => {
		const a = await amendments().findByPk(amendmentId, { transaction: t, lock: t.LOCK.UPDATE });
		if (!a) throw notFound('This amendment');
		const { p, duties } = await protocolFor(a.protocol_id, user, t, true);
		if (!duties.includes('lead')) throw notFound('This amendment');
		if (a.status !== 'requested')
			throw new ServiceError(409, `This amendment was already ${a.status === 'applied' ? 'approved' : 'refused'}.`, undefined, 'decided');
		if (p.status !== 'verified' || p.round !== a.from_round)
			throw conflict('The protocol changed since this amendment was requested (reopened or amended). Refuse it and ask for a new one.');
		if (input.decision === 'refuse') {
			if (!input.note || input.note.length < 3) throw invalid('note: say why the amendment is refused', 'note');
			await a.update({ status: 'refused', decided_by: user.id, decided_at: new Date(), decision_note: input.note }, { transaction: t });
			await recordEvent(
				{
					actorId: user.id,
					entity: 'amendment',
					entityId: a.id,
					protocolId: p.id,
					action: 'amendment_refused',
					oldValue: { status: 'requested' },
					newValue: { status: 'refused' },
					reason: input.note
				},
				t
			);
			return { id: a.id, status: 'refused' as const, round: null };
		}
		const round = await apply(p, a, user, t, input.note ?? null);
		return { id: a.id, status: 'applied' as const, round };
	});
}

async function apply(p: Protocol, a: Amendment, actor: Actor, t: Transaction, note: string | null): Promise<number> {
	const { Discrepancy, Pass } = models();
	const from = p.round;
	const next = from + 1;
	await carryPasses(p.id, p.round, next, t);
	// Every decision stands: the rows are copied with their resolutions (INSERT … SELECT: the whole
	// round in one statement, inside the database).
	await exec(
		`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected, alternative, out_of_range,
		                            resolution, resolved_value, note, resolved_by, resolved_at, settled_by, settled_by_id, carried_from)
		 SELECT protocol_id, :next, position, test_code, field, pass, kind, value, other, expected, alternative, out_of_range,
		        resolution, resolved_value, note, resolved_by, resolved_at, settled_by, settled_by_id, id
		   FROM discrepancies WHERE protocol_id = :p AND round = :r`,
		{ next, p: p.id, r: p.round },
		t
	);
	// Rows settled by a raw decision point at the raw row of the new round (an UPDATE … JOIN over the round).
	await exec(
		`UPDATE discrepancies d JOIN discrepancies raw ON raw.protocol_id = d.protocol_id AND raw.round = d.round AND raw.carried_from = d.settled_by_id
		    SET d.settled_by_id = raw.id WHERE d.protocol_id = :p AND d.round = :next AND d.settled_by = 'raw_decision'`,
		{ p: p.id, next },
		t
	);
	// Only the amended field, and for a raw score its test's derived scores, are reviewed again (one
	// UPDATE for the rows of the round it concerns).
	const reopen = a.field === 'raw' ? `test_code = :test` : `test_code = :test AND field = :field`;
	await exec(
		`UPDATE discrepancies SET resolution = NULL, resolved_value = NULL, note = NULL, resolved_by = NULL, resolved_at = NULL, settled_by = NULL, settled_by_id = NULL,
		        lock_version = lock_version + 1
		  WHERE protocol_id = :p AND round = :next AND ${reopen}`,
		{ p: p.id, next, test: a.test_code, field: a.field },
		t
	);
	const existing = await Discrepancy.findOne({
		attributes: ['id'],
		where: { protocol_id: p.id, round: next, test_code: a.test_code, field: a.field },
		transaction: t
	});
	if (!existing) {
		// Both passes agreed on the field: a card of its own, both passes' values against the amended one.
		const passes = await Pass.findAll({ attributes: ['which', 'scores'], where: { protocol_id: p.id, round: next }, transaction: t });
		const val = (w: 'first' | 'second') => passes.find((x) => x.which === w)?.scores?.[a.test_code]?.[a.field] ?? null;
		const first = val('first');
		const second = val('second');
		let expected: string | null = null;
		let kind: string = classifyPair(a.old_value, parseEntered(a.old_value, a.field), a.new_value, parseEntered(a.new_value, a.field), false);
		if (a.field !== 'raw') {
			const rawKept = (await finalScores(p.id, p.round, t))[a.test_code]?.raw ?? null;
			const info = await referencesForRaw(p.id, p.norm_set_id, a.test_code, rawKept, t);
			const r = info?.refs?.[a.field as DerivedField];
			if (info && r !== undefined && info.z !== null && info.norm) {
				expected = formatReference(a.field as DerivedField, r);
				const pv = parseEntered(a.old_value, a.field);
				void pv;
				if (!same(a.old_value, expected, a.field))
					kind = kindAgainst(info.test, info.groups, info.norm.group_code, rawKept!, null, a.field as DerivedField, a.old_value);
			}
		}
		const pos = Number(((await Discrepancy.max('position', { where: { protocol_id: p.id, round: next }, transaction: t })) as number | null) ?? 0) + 1;
		await Discrepancy.create(
			{
				protocol_id: p.id,
				round: next,
				position: pos,
				test_code: a.test_code,
				field: a.field,
				pass: 'both',
				kind: kind as Kind,
				value: first,
				other: second,
				expected
			},
			{ transaction: t }
		);
	}
	p.set({ status: 'in_review', round: next, verified_at: null, verified_by: null, status_changed_at: dbNow() });
	await saveLocked(p, t, () => conflict('This protocol changed at the same moment elsewhere; nothing was amended. Reload to see its state.'));
	await a.update({ status: 'applied', round: next, decided_by: actor.id, decided_at: new Date(), decision_note: note }, { transaction: t });
	await recordEvent(
		{
			actorId: actor.id,
			entity: 'protocol',
			entityId: p.id,
			protocolId: p.id,
			action: 'amend',
			oldValue: { status: 'verified', round: from, test: a.test_code, field: a.field, value: a.old_value },
			newValue: { status: 'in_review', round: next, test: a.test_code, field: a.field, value: a.new_value, amendment: a.id },
			reason: a.reason
		},
		t
	);
	const tests = await protocolTests(p.id, t);
	const name = tests.find((x) => x.code === a.test_code)?.name ?? a.test_code;
	await notifyReviewStarted(p.id, next, p.reviewer_id, t, { action: 'amendment', reason: a.reason, field: `${name}, ${FIELD_LABELS[a.field].toLowerCase()}` });
	return next;
}

/** Amendments of a protocol, newest first, with who asked and who decided (for the Summary and the protocol page). */
export async function protocolAmendments(protocolId: number) {
	// joined with the test's name and who asked and decided (catalog tables): one statement for the list
	return select<{
		id: number;
		test_code: string;
		test_name: string | null;
		field: Field;
		old_value: string | null;
		new_value: string;
		reason: string;
		status: 'requested' | 'applied' | 'refused';
		from_round: number;
		round: number | null;
		requested_at: Date;
		requested_by_name: string;
		decided_at: Date | null;
		decided_by_name: string | null;
		decision_note: string | null;
	}>(
		`SELECT a.id, a.test_code, (SELECT t.name FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = a.protocol_id AND t.code = a.test_code LIMIT 1) AS test_name,
		        a.field, a.old_value, a.new_value, a.reason, a.status, a.from_round, a.round, a.requested_at, r.name AS requested_by_name, a.decided_at, d.name AS decided_by_name, a.decision_note
		   FROM amendments a JOIN users r ON r.id = a.requested_by LEFT JOIN users d ON d.id = a.decided_by
		  WHERE a.protocol_id = :p ORDER BY a.id DESC`,
		{ p: protocolId }
	);
}

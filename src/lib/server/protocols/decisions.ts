/**
 * Decisions on a protocol in review: the discrepancy list of the current round (the review view),
 * resolutions under the discrepancy's optimistic lock, sign-off (verified, locked), reopening by a
 * lead (a new round; history kept), and the verified values that follow from the decisions.
 */
import { Op, type Transaction } from 'sequelize';
import { z } from 'zod';
import { select, selectOne, exec, transaction, jsonValue, pipeline, guardedRow, markerStatement, sqlTime, IN_TX, type Piped } from '../db';
import { models } from '../models';
import { dbNow, inTx, reading, saveLocked, type DiscrepancyRow, type ProtocolRow } from '../models/protocol';
import { recordEvent, trailRow, TRAIL_COLUMNS } from '../trail';
import { protocolFor, dutiesOf, type Actor } from './service';
import { protocolTests, protocolComposites, normGroups } from '../catalog';
import type { TableRowInput } from '../catalog/norms';
import { isBand, normalizePercentile, parsePercentile } from '../../catalog/norm-forms';
import { conflict, invalid, notFound, parseFirst, ServiceError } from '../errors';
import { charDiff } from '../../scoring/diff';
import { explainKind } from '../../scoring/kinds';
import { checkField } from '../../scoring/reconcile';
import type { Field } from '../../scoring/scales';
import { errorEventRows, replacedCharges, COMPOSITE_DOMAIN, ERROR_EVENTS_COLUMNS, type ResolutionPass, type DiscrepancyRead } from '../audit-stats/record';
import { afterResolution, isSinglePass } from '../verification';
import type { Scores } from './passes';
import { rejudgeDerived } from './evidence';
import { waitsOn } from '../../scoring/waits';
import { kindName } from '../../scoring/kinds';
import { FIELD_LABELS } from '../../status';
// A static import on purpose: the production bundler (Rolldown in Vite 8.3.8) dropped the `why` argument
// of this call when it was reached through a dynamic import(), so reopen and amendment e-mails lost
// their round and reason (tests/integration/review-evidence.test.ts, against the built app).
import { notifyReviewStarted } from '../mail/reminders/scheduling';

export type { DiscrepancyRow };

/** First and second pass's values of a discrepancy (value/other are stored relative to the flagged pass). */
export function passValues(d: Pick<DiscrepancyRow, 'pass' | 'value' | 'other'>): { first: string | null; second: string | null } {
	return d.pass === 'second' ? { first: d.other, second: d.value } : { first: d.value, second: d.other };
}

/** Numerically equal values (a note is needed only when the kept value differs from the recomputation). */
const same = (a: string | null, b: string | null) =>
	a !== null && b !== null && (Number(a) === Number(b) || (isBand(a) && normalizePercentile(a) === normalizePercentile(b)));

/**
 * Rule 5 in words: a single pass's derived value that is right for the other pass's raw score
 * ("fits the first pass's raw score 24"), or null.
 */
function fitsOther(
	d: Pick<DiscrepancyRow, 'field' | 'pass' | 'value' | 'alternative' | 'kind'>,
	otherRaw: string | null,
	ownRaw: string | null
): string | null {
	if (d.field === 'raw' || d.pass === 'both' || d.alternative === null || d.value === null || otherRaw === null) return null;
	if ((d.kind as string) !== 'follows_other_raw' && !same(d.value, d.alternative)) return null;
	const other = d.pass === 'first' ? 'second' : 'first';
	return `fits the ${other} pass’s raw score ${otherRaw}${ownRaw !== null ? ` — the raw ${ownRaw} is likely a typing slip` : ''}`;
}

/** On a raw card: which pass's derived values fit the other pass's raw score (rule 5's evidence). */
function slipOf(d: DiscrepancyRow, rows: readonly DiscrepancyRow[], rawOf: (w: 'first' | 'second', code: string) => string | null): string | null {
	for (const which of ['first', 'second'] as const) {
		const other = which === 'first' ? 'second' : 'first';
		const fit = rows.filter((x) => x.test_code === d.test_code && x.field !== 'raw' && x.pass === which && fitsOther(x, rawOf(other, d.test_code), null));
		if (fit.length === 0) continue;
		const words = fit.map((x) => FIELD_LABELS[x.field]?.toLowerCase().replace('t-score', 'T-score') ?? x.field).join(', ');
		return `The ${which} pass’s ${words} fit${fit.length === 1 ? 's' : ''} the ${other} pass’s raw score ${rawOf(other, d.test_code)} — the raw ${rawOf(which, d.test_code)} is likely a typing slip.`;
	}
	return null;
}

function requireReviewer(duties: string[]) {
	if (!duties.includes('reviewer')) throw notFound();
}

export async function reviewView(protocolId: number, user: Actor) {
	const { p, duties } = await protocolFor(protocolId, user);
	if (!duties.includes('reviewer') && !duties.includes('lead')) throw notFound();
	if (p.status !== 'in_review' && p.status !== 'verified')
		throw new ServiceError(409, 'This protocol is not in review yet: both passes must be submitted first.', undefined, 'not_in_review');
	const tests = await protocolTests(p.id);
	// Both passes' raw scores: after the second submit they are no longer blind, and a reviewer
	// needs them to see what each recomputed value was computed from.
	const { Pass, Discrepancy } = models();
	// plain rows (raw: true), not model instances: the Review page is the most requested page under load
	const passRows = await reading(null, () => Pass.findAll({ attributes: ['which', 'scores'], where: { protocol_id: p.id, round: p.round }, raw: true }));
	const rawOf = (which: 'first' | 'second', code: string) => (jsonValue<Scores>(passRows.find((x) => x.which === which)?.scores) ?? {})[code]?.raw ?? null;
	const rows = (await reading(null, () =>
		Discrepancy.findAll({ where: { protocol_id: p.id, round: p.round }, order: [['position', 'ASC']], raw: true })
	)) as unknown as DiscrepancyRow[];
	// users is a catalog table (no model on this side): the resolvers' names in one read
	const resolverIds = [...new Set(rows.map((d) => d.resolved_by).filter((x): x is number => x !== null))];
	const resolvers = resolverIds.length ? await select<{ id: number; name: string }>('SELECT id, name FROM users WHERE id IN (:ids)', { ids: resolverIds }) : [];
	const resolverOf = (d: DiscrepancyRow) => resolvers.find((u) => u.id === d.resolved_by)?.name ?? null;
	const composites = await protocolComposites(p.id);
	// a composite's cards wait on its parts' open cards, as a derived card waits on its raw score
	const isComposite = (code: string) => composites.some((c) => c.code === code);
	const items = rows.map((d) => ({
		id: d.id,
		test: isComposite(d.test_code) ? null : d.test_code,
		composite: isComposite(d.test_code) ? d.test_code : null,
		field: d.field,
		open: d.resolved_at === null
	}));
	const partsOf = (code: string) => composites.find((c) => c.code === code)?.parts ?? [];
	// an amendment that opened this round: its field's card offers the amended value and the reason
	// the amendment joined with who asked for it (users: a catalog table)
	const amended = await select<{
		test_code: string;
		field: string;
		new_value: string;
		old_value: string | null;
		reason: string;
		name: string;
		decided_at: Date;
	}>(
		`SELECT a.test_code, a.field, a.new_value, a.old_value, a.reason, u.name, a.decided_at FROM amendments a JOIN users u ON u.id = a.requested_by
		  WHERE a.protocol_id = :p AND a.round = :r AND a.status = 'applied'`,
		{ p: p.id, r: p.round }
	);
	const byId = new Map(rows.map((d) => [d.id, d]));
	const seenKinds = new Set<string>();
	const passScores = (which: 'first' | 'second') => jsonValue<Scores>(passRows.find((x) => x.which === which)?.scores) ?? {};
	// adjacent_row: which row of the table was read, beside the one that holds the raw score
	const tableCodes = [...new Set(rows.filter((d) => d.kind === 'adjacent_row').map((d) => d.test_code))];
	const tables = tableCodes.length ? await normGroups(p.norm_set_id, tableCodes) : [];
	const rowText = (r: TableRowInput, field: string) =>
		`${r.lo === r.hi ? r.lo : `${r.lo}–${r.hi}`} (${field === 'percentile' && r.percentile !== null ? `percentile ${r.percentile}` : `score ${r.score}`})`;
	/** Words under a card that the kind alone does not say: composites' parts, the waiting, the row read. */
	const contextOf = (d: DiscrepancyRow): string | null => {
		const c = composites.find((x) => x.code === d.test_code);
		if (c) {
			const partsOf = (which: 'first' | 'second') => c.parts.map((part) => passScores(which)[part]?.[c.part_field] ?? '—').join(' + ');
			let text = `Parts (${c.part_field} scores): first pass ${partsOf('first')}, second pass ${partsOf('second')} · norm group ${c.groupText}.`;
			if (d.kind === 'carried')
				text += ` Waits on its parts: this value follows from the pass's own ${(d.field as string) === 'sum' ? 'part scores' : 'sum'}; settle the parts first, then keep the value their decision gives.`;
			if (d.kind === 'adjacent_row') text += ' Read from the row next to the one that holds the sum.';
			return text;
		}
		if (d.kind !== 'adjacent_row') return null;
		const test = tests.find((x) => x.code === d.test_code);
		const table = tables.find((g) => g.test_code === d.test_code && g.group_code === test?.groupCode)?.rows ?? [];
		const raw = Number(rawOf(d.pass === 'second' ? 'second' : 'first', d.test_code));
		const i = table.findIndex((r) => raw >= r.lo - 1e-9 && raw <= r.hi + 1e-9);
		if (i < 0) return null;
		const matches = (r: TableRowInput | undefined) =>
			r &&
			d.value !== null &&
			(d.field === 'percentile' ? String(r.percentile) === d.value || Number(r.percentile) === Number(d.value) : Number(r.score) === Number(d.value));
		const read = [table[i - 1], table[i + 1]].find(matches);
		return `Raw ${raw} is in the row ${rowText(table[i], d.field)}${read ? `; the value entered is the row ${table[i - 1] === read ? 'above' : 'below'}, ${rowText(read, d.field)}` : ''}.`;
	};
	return {
		protocol: p.get({ plain: true }),
		canResolve: duties.includes('reviewer') && p.status === 'in_review',
		singlePass: await isSinglePass(p.id),
		tests: tests.map((x) => ({ code: x.code, name: x.name, domain: x.domainName, group: x.groupText, raw: x.raw, bounds: x.bounds, reported: x.reported })),
		discrepancies: rows.map((d) => {
			const v = passValues(d);
			const test = tests.find((x) => x.code === d.test_code);
			const composite = composites.find((x) => x.code === d.test_code);
			return {
				id: d.id,
				test: d.test_code,
				testName: test?.name ?? composite?.name ?? d.test_code,
				composite: !!composite,
				context: contextOf(d),
				group: test?.groupText ?? composite?.groupText ?? null,
				raws: { first: rawOf('first', d.test_code), second: rawOf('second', d.test_code) },
				domain: test?.domainName ?? (composite ? 'Composites' : ''),
				field: d.field,
				pass: d.pass,
				kind: d.kind,
				kindName: kindName(d.kind),
				explanation: explainKind(d.kind),
				// the long explanation is shown once per kind (on its first card); chips keep it as a tooltip
				firstOfKind: !seenKinds.has(d.kind) && !!seenKinds.add(d.kind),
				alternative: d.alternative,
				fits: fitsOther(d, rawOf(d.pass === 'second' ? 'first' : 'second', d.test_code), d.pass === 'both' ? null : rawOf(d.pass, d.test_code)),
				slip: d.field === 'raw' ? slipOf(d, rows, rawOf) : null,
				waitsOn: waitsOn(
					items.find((x) => x.id === d.id)!,
					items,
					partsOf
				).map((w) => ({ id: w.id, field: w.field })),
				settledBy: d.settled_by,
				settledByRaw: d.settled_by === 'raw_decision' && d.settled_by_id ? (byId.get(d.settled_by_id)?.resolved_value ?? null) : null,
				carried: d.carried_from !== null && d.resolved_at !== null,
				amendment: (() => {
					const a = amended.find((x) => x.test_code === d.test_code && x.field === d.field);
					return a ? { value: a.new_value, before: a.old_value, reason: a.reason, by: a.name, at: a.decided_at } : null;
				})(),
				contradicts: d.resolved_at !== null && d.expected !== null && !same(d.resolved_value, d.expected),
				first: v.first,
				second: v.second,
				expected: d.expected,
				outOfRange: !!d.out_of_range,
				diff: charDiff(v.first, v.second),
				resolution: d.resolution,
				resolvedValue: d.resolved_value,
				note: d.note,
				resolver: resolverOf(d),
				resolvedAt: d.resolved_at,
				lockVersion: d.lock_version
			};
		})
	};
}

export const resolutionSchema = z.object({
	choice: z.enum(['first', 'second', 'recomputed', 'other']),
	value: z.string().trim().max(12).optional().nullable(),
	note: z.string().trim().max(2000).optional().nullable(),
	lockVersion: z.number().int().min(1)
});

/** The decided row as the resolution reads it (locked), with its protocol's battery. */
type DecidedRow = Omit<DiscrepancyRead, 'battery_id'> & { resolved_at: Date | null; lock_version: number };
/** What a decision reads of its protocol (unlocked, but for a raw decision), with the decided test's domain. */
type DecisionProtocol = Pick<ProtocolRow, 'id' | 'status' | 'round' | 'norm_set_id' | 'battery_id' | 'first_scorer_id' | 'second_scorer_id' | 'reviewer_id'> & {
	domain: string | null;
};
const PROTOCOL_COLUMNS = 'p.id, p.status, p.round, p.norm_set_id, p.battery_id, p.first_scorer_id, p.second_scorer_id, p.reviewer_id';

/**
 * Resolution, the measured hot path of issue 18 (bench:http, its per-statement profile): raw SQL on
 * the transaction's connection (`pipeline` in ../db), because under load the time is the round trips
 * and the JS per statement. A decision of a derived score is five round trips: START; the decided row
 * locked FOR UPDATE with everything the decision reads (its protocol and the test's domain, the
 * round's rows, the composite it belongs to, the round's passes), one pipeline; the writes (the row
 * under its lock_version, the trail event, the error events, the protocol's compare-and-set), one
 * pipeline, each write after the first guarded by `IN_TX`; the commit marker; COMMIT.
 */
export async function resolveDiscrepancy(discrepancyId: number, user: Actor, body: unknown) {
	const input = parseFirst(resolutionSchema, body);
	const { choice, note } = input;
	return transaction(async (t) => {
		const { Discrepancy } = models();
		// Lock order, the same in every decision: discrepancy rows first, the protocol row last (see
		// DEVELOPERS.md, "Transactions"). The decided row, locked with its lock_version: two decisions
		// of one discrepancy serialize here; decisions of different discrepancies do not. The reads sent
		// behind it run once the lock is held (in order, on this connection) and lock nothing: the
		// protocol is checked again by the compare-and-set at the end.
		const [locked, protocols, roundRows, composites, passes] = (await pipeline(t, [
			{
				sql: `SELECT d.id, d.protocol_id, d.round, d.test_code, d.field, d.pass, d.kind, d.value, d.other, d.resolution, d.resolved_value,
				             d.expected, d.carried_from, d.resolved_at, d.lock_version
				        FROM discrepancies d WHERE d.id = ? FOR UPDATE`,
				values: [discrepancyId]
			},
			{
				// the current (or latest) version's domain wins, as in audit-stats domainsFor; none: a composite (domainOf)
				sql: `SELECT ${PROTOCOL_COLUMNS},
				             (SELECT t.domain FROM tests t WHERE t.code = d.test_code ORDER BY t.is_current DESC, t.version DESC LIMIT 1) AS domain
				        FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id WHERE d.id = ?`,
				values: [discrepancyId]
			},
			{
				sql: `SELECT x.id, x.test_code, x.field, x.resolved_at IS NULL AS open
				        FROM discrepancies d JOIN discrepancies x ON x.protocol_id = d.protocol_id AND x.round = d.round WHERE d.id = ?`,
				values: [discrepancyId]
			},
			{
				sql: `SELECT c.definition FROM discrepancies d JOIN protocol_composites c ON c.protocol_id = d.protocol_id AND c.code = d.test_code WHERE d.id = ?`,
				values: [discrepancyId]
			},
			{
				sql: `SELECT s.which, s.scorer_id, s.submitted_at FROM discrepancies d JOIN passes s ON s.protocol_id = d.protocol_id AND s.round = d.round WHERE d.id = ?`,
				values: [discrepancyId]
			}
		])) as [
			DecidedRow[],
			DecisionProtocol[],
			Array<{ id: number; test_code: string; field: string; open: number }>,
			Array<{ definition: unknown }>,
			ResolutionPass[]
		];
		const d = locked[0];
		if (!d) throw notFound('This discrepancy');
		const raw = d.field === 'raw';
		let p = protocols[0];
		// A raw decision judges its test's derived rows again and may add rows (new positions), so it takes
		// those rows and then the protocol row, as before. Any other decision has read the protocol
		// unlocked and takes its row only at the very end, for the compare-and-set of lock_version.
		if (raw && p) {
			await Discrepancy.findAll({
				attributes: ['id'],
				where: { protocol_id: d.protocol_id, round: d.round, test_code: d.test_code, field: { [Op.ne]: 'raw' } },
				...inTx(t, true)
			});
			const { domain } = p;
			const [row] = await select<DecisionProtocol>(`SELECT ${PROTOCOL_COLUMNS} FROM protocols p WHERE p.id = :id FOR UPDATE`, { id: d.protocol_id }, t);
			p = row ? { ...row, domain } : row;
		}
		if (!p || !dutiesOf(p, user).includes('reviewer')) throw notFound();
		if (p.status !== 'in_review' || d.round !== p.round) throw conflict('This protocol is not open for review (signed off, or a newer round exists).');
		if (input.lockVersion !== d.lock_version) throw await staleResolution(d.id, t);
		if (!raw) {
			const openRaw = roundRows.some((x) => x.open && x.test_code === d.test_code && x.field === 'raw');
			if (openRaw)
				throw new ServiceError(
					409,
					'Settle this test’s raw score first: its derived scores are judged again against the raw score you keep.',
					'choice',
					'waits_on_raw'
				);
			// a composite's value waits on its parts, as a derived score waits on its raw score
			const composite = composites[0] ? jsonValue<{ name: string; parts: string[] }>(composites[0].definition) : null;
			const part = composite ? roundRows.find((x) => x.open && composite.parts.includes(x.test_code)) : undefined;
			if (composite && part)
				throw new ServiceError(
					409,
					`Settle the parts of ${composite.name} first (${part.test_code} is still open): the composite follows from the part scores you keep.`,
					'choice',
					'waits_on_parts'
				);
		}
		const v = passValues(d);
		let kept: string | null;
		if (choice === 'first') kept = v.first;
		else if (choice === 'second') kept = v.second;
		else if (choice === 'recomputed') kept = d.expected;
		else kept = input.value ?? null;
		if (choice === 'recomputed' && d.expected === null) throw invalid('There is no recomputed value for this field (a raw score has no reference).', 'choice');
		if (kept === null || kept === '')
			throw invalid(
				choice === 'other' ? 'Enter the value to keep.' : 'That pass left this field empty; choose another value or enter one.',
				choice === 'other' ? 'value' : 'choice'
			);
		// The recomputed value is the engine's own (z is never clamped); anything a person chose is checked.
		if (choice !== 'recomputed') {
			const test = (await protocolTests(p.id, t)).find((x) => x.code === d.test_code);
			if (test && test.normScale === 'percentile' && d.field === 'percentile') {
				// a percentile-only norm: the value kept may be a band as the manual prints it
				const band = parsePercentile(kept, true);
				if (typeof band === 'string') throw invalid(`The value to keep is not valid: ${band}.`, 'value');
			} else if (test) {
				const problems = checkField(test, d.field, kept);
				if (problems.length) throw invalid(`The value to keep is not valid: ${problems[0].message}`, 'value');
			}
		}
		const needsNote = choice === 'other' || (d.expected !== null && !same(kept, d.expected));
		if (needsNote && (!note || note.length < 3)) {
			throw invalid(
				choice === 'other' ? 'Say why you keep another value (a short note).' : 'The kept value differs from the recomputed value: add a note saying why.',
				'note'
			);
		}
		const before = { resolution: d.resolution, resolved_value: d.resolved_value, resolved_at: d.resolved_at, lock_version: d.lock_version };
		const event = trailRow({
			actorId: user.id,
			entity: 'discrepancy',
			entityId: d.id,
			protocolId: p.id,
			action: before.resolved_at ? 'change_resolution' : 'resolve',
			oldValue: before.resolved_at
				? { choice: before.resolution, value: before.resolved_value }
				: { test: d.test_code, field: d.field, first: v.first, second: v.second, expected: d.expected, kind: d.kind },
			newValue: { choice, value: kept },
			reason: note || null
		});
		// the error events (audit-stats recordResolution's rows), from the row as it is after this decision
		const decided = { ...d, battery_id: p.battery_id, resolution: choice, resolved_value: kept };
		const charges = errorEventRows(decided, passes, p.domain ?? COMPOSITE_DOMAIN);
		// A row never decided before has no charges to take back (they are written only for a decided
		// row, and taken back when a decision is undone), so the DELETE is sent only when there can be some.
		const replaced = before.resolved_at !== null || d.carried_from !== null ? replacedCharges(decided) : [];
		const cols = ERROR_EVENTS_COLUMNS;
		const writes = await pipeline(t, [
			{
				// under the row's lock_version (the version the reviewer's view showed, checked above)
				sql: `UPDATE discrepancies SET resolution = ?, resolved_value = ?, note = ?, resolved_by = ?, resolved_at = CURRENT_TIMESTAMP(3), lock_version = lock_version + 1
				       WHERE id = ? AND lock_version = ?`,
				values: [choice, kept, note || null, user.id, d.id, d.lock_version]
			},
			{
				sql: `INSERT INTO audit_events (${TRAIL_COLUMNS.join(', ')}) VALUES ${guardedRow(TRAIL_COLUMNS, 'entity')}`,
				values: TRAIL_COLUMNS.map((c) => event[c])
			},
			...(replaced.length ? [{ sql: `DELETE FROM error_events WHERE discrepancy_id IN (?) AND ${IN_TX}`, values: [replaced] }] : []),
			...(charges.length
				? [
						{
							// the same scorer on both passes would be one row (UNIQUE discrepancy_id, scorer_id): the later one wins
							sql: `INSERT INTO error_events (${cols.join(', ')}) VALUES ${charges.map(() => guardedRow(cols, 'discrepancy_id')).join(', ')}
							      ON DUPLICATE KEY UPDATE kind = VALUES(kind), field = VALUES(field), entered_at = VALUES(entered_at), judgement = VALUES(judgement)`,
							values: charges.flatMap((e) => cols.map((c) => (c === 'entered_at' ? sqlTime(e.entered_at) : e[c])))
						}
					]
				: []),
			// Last (but for a raw decision, below): the protocol's lock_version moves, so a sign-off sent from
			// a view older than this decision is refused as stale. Compare-and-set under the protocol row's
			// lock, held from here to the commit only: the protocol must still be in review, in this round,
			// with this reviewer. A sign-off, reopen or reassignment that committed first wins and this
			// decision is refused; one that comes later waits for the commit and sees the new version.
			...(raw ? [] : [protocolCas(p, user), markerStatement(t)])
		]);
		if ((writes[0] as OkPacket).affectedRows !== 1) throw await staleResolution(d.id, t);
		let moved = raw ? 0 : (writes[writes.length - 2] as OkPacket).affectedRows;
		let rejudged = null;
		let open: number;
		if (raw) {
			await afterResolution(d.id, t); // the scorers' standing follows raw decisions only
			// The raw score is settled: the test's derived discrepancies are judged again, in this transaction.
			rejudged = await rejudgeDerived(p, d.test_code, kept, { by: 'raw_decision', id: d.id, actorId: user.id }, t);
			open = await Discrepancy.count({ where: { protocol_id: p.id, round: p.round, resolved_at: null }, transaction: t });
			const [cas] = (await pipeline(t, [protocolCas(p, user)])) as OkPacket[];
			moved = cas.affectedRows;
		} else {
			// as read under this row's lock: the round's other open rows (a decision still in flight counts as open)
			open = roundRows.filter((x) => x.open && x.id !== d.id).length;
		}
		if (moved !== 1) throw conflict('This protocol was signed off or changed at the same moment; your choice was not saved. Reload to see its state.');
		return { id: d.id, resolution: choice, resolvedValue: kept, note: note || null, lockVersion: before.lock_version + 1, open, rejudged };
	});
}

type OkPacket = { affectedRows: number; insertId: number };
/** The protocol's compare-and-set at the end of a decision (see resolveDiscrepancy). */
const protocolCas = (p: Pick<ProtocolRow, 'id' | 'round'>, user: Actor): Piped => ({
	sql: `UPDATE protocols SET lock_version = lock_version + 1 WHERE id = ? AND status = 'in_review' AND round = ? AND reviewer_id = ? AND ${IN_TX}`,
	values: [p.id, p.round, user.id]
});

/** The conflict answer for a resolution made on a stale view: who changed it, and to what. */
async function staleResolution(id: number, t: Transaction): Promise<ServiceError> {
	// the row as it is now, with its resolver's name (users: a catalog table)
	const now = await selectOne<{ resolved_value: string | null; name: string | null }>(
		'SELECT d.resolved_value, u.name FROM discrepancies d LEFT JOIN users u ON u.id = d.resolved_by WHERE d.id = :id',
		{ id },
		t
	);
	return new ServiceError(
		409,
		`Someone else changed this discrepancy first${now?.name ? ` (${now.name} kept ${now.resolved_value ?? 'no value'})` : ''}. Reload to see it; your choice was not saved.`,
		undefined,
		'stale'
	);
}

/** Kept values that differ from the recomputation (each with its note): sign-off lists them for one confirmation. */
export async function keptAgainstRecomputation(protocolId: number, round: number, t?: Transaction) {
	const rows = await reading(t, () =>
		models().Discrepancy.findAll({
			attributes: ['id', 'test_code', 'field', 'resolved_value', 'expected', 'note'],
			where: { protocol_id: protocolId, round, resolved_at: { [Op.ne]: null }, expected: { [Op.ne]: null } },
			order: [['position', 'ASC']],
			transaction: t ?? undefined
		})
	);
	return rows
		.filter((d) => !same(d.resolved_value, d.expected))
		.map((d) => ({ id: d.id, test: d.test_code, field: d.field, kept: d.resolved_value, recomputed: d.expected, note: d.note }));
}

export async function signOff(protocolId: number, user: Actor, body: unknown) {
	const parsed = z.object({ lockVersion: z.number().int().min(1), confirmKept: z.boolean().optional() }).safeParse(body);
	if (!parsed.success) throw invalid('lockVersion: expected the protocol version you reviewed', 'lockVersion');
	return transaction(async (t) => {
		const { p, duties } = await protocolFor(protocolId, user, t, true);
		requireReviewer(duties);
		if (p.status === 'verified') throw new ServiceError(409, 'This protocol is already signed off.', undefined, 'already_verified');
		if (p.status !== 'in_review') throw conflict('Only a protocol in review can be signed off.');
		if (p.lock_version !== parsed.data.lockVersion)
			throw new ServiceError(
				409,
				'The protocol changed since you opened it (a decision was changed, or it was reassigned or reopened). Reload and check before signing off.',
				undefined,
				'stale'
			);
		const open = await models().Discrepancy.count({ where: { protocol_id: p.id, round: p.round, resolved_at: null }, transaction: t });
		if (open > 0) throw conflict(`${open} discrepanc${open === 1 ? 'y is' : 'ies are'} still open. Resolve every one before signing off.`);
		const against = await keptAgainstRecomputation(p.id, p.round, t);
		if (against.length > 0 && parsed.data.confirmKept !== true) {
			const list = against.map((x) => `${x.test} ${FIELD_LABELS[x.field] ?? x.field}: kept ${x.kept}, recomputed ${x.recomputed}`).join('; ');
			throw new ServiceError(
				409,
				`Confirm the ${against.length} kept value${against.length === 1 ? '' : 's'} that differ${against.length === 1 ? 's' : ''} from the recomputation before signing off (${list}).`,
				'confirmKept',
				'confirm_kept'
			);
		}
		// compare-and-set on lock_version (the model's version): on a Galera cluster the FOR UPDATE above locks only on this node
		p.set({ status: 'verified', verified_at: dbNow(), verified_by: user.id, status_changed_at: dbNow() });
		await saveLocked(
			p,
			t,
			() => new ServiceError(409, 'This protocol was signed off or changed at the same moment elsewhere. Reload to see its state.', undefined, 'stale')
		);
		await recordEvent(
			{
				actorId: user.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'sign_off',
				oldValue: 'in_review',
				newValue: { status: 'verified', round: p.round, ...(against.length ? { keptAgainstRecomputation: against } : {}) }
			},
			t
		);
		return { status: 'verified' as const };
	});
}

/** A new review round starts from the same two passes: both are copied from `from` to `to` (reopen, amendment). */
export async function carryPasses(protocolId: number, from: number, to: number, t: Transaction): Promise<void> {
	// INSERT … SELECT: the passes are copied inside the database, never read into the app
	await exec(
		`INSERT INTO passes (protocol_id, round, which, scorer_id, status, scores, fields_entered, draft_version, submitted_at)
		 SELECT protocol_id, :to, which, scorer_id, status, scores, fields_entered, draft_version, submitted_at FROM passes WHERE protocol_id = :p AND round = :from ORDER BY which`,
		{ to, p: protocolId, from },
		t
	);
}

/**
 * A lead reopens a verified protocol with a reason: a new review round. The round's discrepancies are
 * carried over unresolved (the earlier decisions stay in history and are shown as the previous
 * decision), so the reviewer decides again and signs off again.
 */
export async function reopen(protocolId: number, user: Actor, reason: string) {
	if (!reason || reason.trim().length < 5) throw invalid('Give a reason for reopening (at least a few words).', 'reason');
	return transaction(async (t) => {
		const { p, duties } = await protocolFor(protocolId, user, t, true);
		if (!duties.includes('lead')) throw notFound();
		if (p.status !== 'verified') throw conflict('Only a verified protocol can be reopened.');
		const next = p.round + 1;
		await carryPasses(p.id, p.round, next, t);
		// unresolved, each pointing at its previous decision (shown and offered as the default);
		// INSERT … SELECT copies the whole round in one statement
		await exec(
			`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected, alternative, out_of_range, carried_from)
			 SELECT protocol_id, :next, position, test_code, field, pass, kind, value, other, expected, alternative, out_of_range, id FROM discrepancies WHERE protocol_id = :p AND round = :r`,
			{ next, p: p.id, r: p.round },
			t
		);
		const round = p.round;
		p.set({ status: 'in_review', round: next, verified_at: null, verified_by: null, status_changed_at: dbNow() });
		await saveLocked(p, t, () => conflict('This protocol was reopened at the same moment elsewhere.'));
		await recordEvent(
			{
				actorId: user.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: 'reopen',
				oldValue: { status: 'verified', round },
				newValue: { status: 'in_review', round: next },
				reason: reason.trim()
			},
			t
		);
		await notifyReviewStarted(p.id, next, p.reviewer_id, t, { action: 'reopen', reason: reason.trim() });
		return { round: next };
	});
}

/** Earlier rounds' decisions for the same fields (shown as "previous decision" after a reopen). */
export async function previousDecisions(protocolId: number, round: number) {
	if (round <= 1) return [];
	const rows = await reading(null, () =>
		models().Discrepancy.findAll({
			attributes: ['test_code', 'field', 'resolution', 'resolved_value', 'note', 'round'],
			where: { protocol_id: protocolId, round: round - 1, resolved_at: { [Op.ne]: null } },
			raw: true
		})
	);
	return rows.map((d) => ({
		test_code: d.test_code,
		field: d.field as string,
		resolution: d.resolution!,
		resolved_value: d.resolved_value!,
		note: d.note,
		round: d.round
	}));
}

/** Two entered values are the same number; an empty or non-numeric value equals nothing. */
function sameNumber(x: string | null | undefined, y: string | null | undefined): boolean {
	if (x == null || y == null || String(x).trim() === '' || String(y).trim() === '') return false;
	const a = Number(x);
	const b = Number(y);
	return Number.isFinite(a) && Number.isFinite(b) && a === b;
}

/** The verified value of every field: the pass value where both agreed, else the resolution. */
export async function finalScores(protocolId: number, round: number, t?: Transaction): Promise<Scores> {
	const { Pass, Discrepancy } = models();
	const passes = await reading(t, () =>
		Pass.findAll({ attributes: ['which', 'scores'], where: { protocol_id: protocolId, round }, transaction: t ?? undefined })
	);
	const a = jsonValue<Scores>(passes.find((x) => x.which === 'first')?.scores) ?? {};
	const b = jsonValue<Scores>(passes.find((x) => x.which === 'second')?.scores) ?? {};
	const rows = await reading(t, () =>
		Discrepancy.findAll({
			attributes: ['test_code', 'field', 'resolved_value'],
			where: { protocol_id: protocolId, round, resolved_at: { [Op.ne]: null } },
			order: [['position', 'ASC']],
			transaction: t ?? undefined
		})
	);
	const out: Scores = {};
	for (const code of new Set([...Object.keys(a), ...Object.keys(b)])) {
		// Derived scores are checked against each pass's own raw score, so when the raw scores differed
		// the derived values follow the pass whose raw score was kept.
		// An empty raw score is no number at all (Number(null) and Number('') are 0, which once made an
		// empty first pass look like a kept raw score of 0).
		const rawKept = rows.find((r) => r.test_code === code && r.field === 'raw')?.resolved_value;
		const base = rawKept != null && sameNumber(b[code]?.raw, rawKept) && !sameNumber(a[code]?.raw, rawKept) ? b : a;
		const other = base === a ? b : a;
		out[code] = {};
		for (const f of new Set([...Object.keys(a[code] ?? {}), ...Object.keys(b[code] ?? {})]) as Set<Field>) {
			out[code][f] = base[code]?.[f] ?? other[code]?.[f] ?? null;
		}
	}
	for (const r of rows) {
		out[r.test_code] ??= {};
		out[r.test_code][r.field] = r.resolved_value;
	}
	return out;
}

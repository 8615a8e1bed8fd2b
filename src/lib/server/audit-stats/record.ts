/**
 * Keeping the audit's summary rows up to date. The workflow calls these inside its own
 * transactions, so the summaries commit (or roll back) with the change that caused them:
 *
 *   recordSubmission(protocolId, round, t)  once both passes of the round are submitted
 *                                           → audit_fields, agreement_pairs (row level) and the
 *                                             daily sums audit_daily, agreement_daily,
 *                                             agreement_pair_daily
 *   recordResolution(discrepancyId, t)      after a discrepancy row was resolved (or re-resolved)
 *                                           → error_events
 *
 * Both are idempotent: they delete what they wrote before for the same round / discrepancy (and
 * subtract it from the daily sums) and write it again from the current rows.
 */
import type { Transaction } from 'sequelize';
import { exec, select, selectOne, jsonValue } from '../db';
import { labelFor } from '../../scoring/labels';
import { parseEntered, FIELDS, type Field, type DerivedField } from '../../scoring/scales';

type PassScores = Record<string, Partial<Record<Field, string | number | null>>>;

interface PassRow {
	id: number;
	fields_entered: number;
	which: 'first' | 'second';
	scorer_id: number;
	status: string;
	scores: unknown;
	submitted_at: Date | string | null;
}

/** Fields that carry a descriptive label (z is labelled through its standard-score equivalent). */
export const LABELLED_FIELDS: readonly DerivedField[] = ['z', 'standard', 'scaled', 't', 'percentile'];

/** An entered value as a finite number, or null (empty or not a number). */
export function numeric(v: unknown, field: Field): number | null {
	if (v === null || v === undefined) return null;
	if (typeof v !== 'number' && typeof v !== 'string') return null;
	const n = parseEntered(v, field);
	return n === null || !Number.isFinite(n) ? null : n;
}

/** The band id of an entered value on a labelled field, or null. */
export function bandOf(field: Field, value: number | null): string | null {
	if (value === null || field === 'raw') return null;
	return labelFor(field, value).id;
}

function isEntered(v: unknown): boolean {
	if (v === null || v === undefined) return false;
	if (typeof v === 'string') return v.trim() !== '';
	return true;
}

async function domainsFor(codes: string[], t: Transaction): Promise<Map<string, string>> {
	const out = new Map<string, string>();
	if (codes.length === 0) return out;
	const rows = await select<{ code: string; domain: string }>(
		`SELECT code, domain FROM tests WHERE code IN (:codes) ORDER BY is_current ASC, version ASC`,
		{ codes },
		t
	);
	for (const r of rows) out.set(r.code, r.domain); // current (or latest) version wins
	return out;
}

/**
 * Both passes of a round are submitted: write one audit_fields row per pass × test (fields that
 * scorer entered) and one agreement_pairs row per test × field that either pass entered.
 */
export async function recordSubmission(protocolId: number, round: number, t: Transaction): Promise<void> {
	const protocol = await selectOne<{ battery_id: number }>('SELECT battery_id FROM protocols WHERE id = :protocolId', { protocolId }, t);
	if (!protocol) throw new Error(`recordSubmission: protocol ${protocolId} does not exist`);
	const passes = await select<PassRow>(
		`SELECT id, which, scorer_id, status, scores, fields_entered, submitted_at FROM passes
		  WHERE protocol_id = :protocolId AND round = :round`,
		{ protocolId, round },
		t
	);
	const first = passes.find((p) => p.which === 'first');
	const second = passes.find((p) => p.which === 'second');
	if (!first || !second || first.status !== 'submitted' || second.status !== 'submitted') {
		throw new Error(`recordSubmission: protocol ${protocolId} round ${round} does not have two submitted passes`);
	}
	const s1 = jsonValue<PassScores>(first.scores) ?? {};
	const s2 = jsonValue<PassScores>(second.scores) ?? {};
	const codes = [...new Set([...Object.keys(s1), ...Object.keys(s2)])];
	const domains = await domainsFor(codes, t);
	const enteredAt = (p: PassRow) => (p.submitted_at ? new Date(p.submitted_at) : new Date());
	const roundAt = new Date(Math.max(enteredAt(first).getTime(), enteredAt(second).getTime()));

	const where = 'protocol_id = :protocolId AND round = :round';
	// A round recorded before (recorded again): take its rows out of the sums first. The usual case,
	// a round's first recording, has none, and one look-up replaces the subtraction's statements.
	const earlier = await selectOne<{ n: number }>(
		`SELECT EXISTS (SELECT 1 FROM audit_fields WHERE ${where}) + EXISTS (SELECT 1 FROM agreement_pairs WHERE ${where}) AS n`,
		{ protocolId, round },
		t
	);
	if (Number(earlier?.n ?? 1) > 0) {
		await applyToDaily({ protocolId, round }, -1, t);
		await exec(`DELETE FROM audit_fields WHERE ${where}`, { protocolId, round }, t);
		await exec(`DELETE FROM agreement_pairs WHERE ${where}`, { protocolId, round }, t);
	}

	const fieldRows: unknown[][] = [];
	for (const pass of [first, second]) {
		const scores = pass === first ? s1 : s2;
		// the whole pass: the workflow's own count is the denominator of the overall rates
		fieldRows.push([
			pass.id,
			'',
			protocolId,
			round,
			pass.which,
			pass.scorer_id,
			protocol.battery_id,
			'',
			Number(pass.fields_entered) || 0,
			0,
			0,
			enteredAt(pass)
		]);
		for (const code of Object.keys(scores)) {
			const values = scores[code] ?? {};
			const raw = isEntered(values.raw) ? 1 : 0;
			const derived = FIELDS.filter((f) => f !== 'raw' && isEntered(values[f])).length;
			if (raw + derived === 0) continue;
			fieldRows.push([
				pass.id,
				code,
				protocolId,
				round,
				pass.which,
				pass.scorer_id,
				protocol.battery_id,
				domains.get(code) ?? 'unknown',
				raw + derived,
				raw,
				derived,
				enteredAt(pass)
			]);
		}
	}
	const pairRows: unknown[][] = [];
	for (const code of codes) {
		for (const field of FIELDS) {
			const a = s1[code]?.[field];
			const b = s2[code]?.[field];
			if (!isEntered(a) && !isEntered(b)) continue;
			const x = numeric(a, field);
			const y = numeric(b, field);
			pairRows.push([
				protocolId,
				round,
				protocol.battery_id,
				code,
				domains.get(code) ?? 'unknown',
				field,
				first.scorer_id,
				second.scorer_id,
				x,
				y,
				bandOf(field, x),
				bandOf(field, y),
				roundAt
			]);
		}
	}
	await insertMany('audit_fields', AUDIT_FIELDS_COLUMNS, fieldRows, t);
	await insertMany('agreement_pairs', AGREEMENT_PAIRS_COLUMNS, pairRows, t);
	await applyToDaily({ protocolId, round }, 1, t);
}

export const AUDIT_FIELDS_COLUMNS = [
	'pass_id',
	'test_code',
	'protocol_id',
	'round',
	'which',
	'scorer_id',
	'battery_id',
	'domain',
	'fields_entered',
	'raw_fields',
	'derived_fields',
	'entered_at'
];
export const AGREEMENT_PAIRS_COLUMNS = [
	'protocol_id',
	'round',
	'battery_id',
	'test_code',
	'domain',
	'field',
	'first_scorer_id',
	'second_scorer_id',
	'first_value',
	'second_value',
	'first_label',
	'second_label',
	'entered_at'
];

const BOTH = '(g.first_value IS NOT NULL AND g.second_value IS NOT NULL)';
const MEASURES: Array<[string, string]> = [
	['pairs', `SUM(${BOTH})`],
	['one_sided', 'SUM((g.first_value IS NULL) <> (g.second_value IS NULL))'],
	['exact', `SUM(${BOTH} AND g.first_value = g.second_value)`],
	['sx', `SUM(IF(${BOTH}, g.first_value, 0))`],
	['sy', `SUM(IF(${BOTH}, g.second_value, 0))`],
	['sxx', `SUM(IF(${BOTH}, g.first_value * g.first_value, 0))`],
	['syy', `SUM(IF(${BOTH}, g.second_value * g.second_value, 0))`],
	['sxy', `SUM(IF(${BOTH}, g.first_value * g.second_value, 0))`],
	['sd', `SUM(IF(${BOTH}, g.first_value - g.second_value, 0))`],
	['sdd', `SUM(IF(${BOTH}, (g.first_value - g.second_value) * (g.first_value - g.second_value), 0))`]
];

/**
 * Add (sign 1) or subtract (sign −1) the row-level rows of one protocol round (or of everything)
 * in audit_fields / agreement_pairs to the daily sums.
 */
export async function applyToDaily(scope: { protocolId: number; round: number } | 'all', sign: 1 | -1, t?: Transaction | null): Promise<void> {
	const p = scope === 'all' ? { sign } : { ...scope, sign };
	const whereOf = (alias: string) => (scope === 'all' ? '1 = 1' : `${alias}.protocol_id = :protocolId AND ${alias}.round = :round`);
	await exec(
		`INSERT INTO audit_daily (day, scorer_id, battery_id, test_code, domain, passes, fields_entered, raw_fields, derived_fields)
		 SELECT DATE(a.entered_at), a.scorer_id, a.battery_id, a.test_code, MAX(a.domain), :sign * COUNT(*), :sign * SUM(a.fields_entered),
		        :sign * SUM(a.raw_fields), :sign * SUM(a.derived_fields)
		   FROM audit_fields a WHERE ${whereOf('a')}
		  GROUP BY DATE(a.entered_at), a.scorer_id, a.battery_id, a.test_code
		 ON DUPLICATE KEY UPDATE passes = passes + VALUES(passes), fields_entered = fields_entered + VALUES(fields_entered),
		        raw_fields = raw_fields + VALUES(raw_fields), derived_fields = derived_fields + VALUES(derived_fields)`,
		p,
		t
	);
	const gWhere = whereOf('g');
	const cols = MEASURES.map(([c]) => c).join(', ');
	const sums = MEASURES.map(([, e]) => `:sign * ${e}`).join(', ');
	const update = MEASURES.map(([c]) => `${c} = ${c} + VALUES(${c})`).join(', ');
	const buckets: Array<[string, string, string]> = [
		['agreement_daily', 'day', 'DATE(g.entered_at)'],
		['agreement_weekly', 'week', 'DATE_SUB(DATE(g.entered_at), INTERVAL WEEKDAY(g.entered_at) DAY)']
	];
	// each pair counts three times — for everyone (scorer 0), for its first and for its second scorer —
	// in one statement per table (a UNION ALL of the three), not three
	const asScorers = ['0', 'g.first_scorer_id', 'g.second_scorer_id']
		.map((scorer) => `SELECT ${scorer} AS as_scorer, g.* FROM agreement_pairs g WHERE ${gWhere}`)
		.join(' UNION ALL ');
	for (const [table, col, bucket] of buckets) {
		await exec(
			`INSERT INTO ${table} (scorer_id, ${col}, battery_id, test_code, field, first_label, second_label, ${cols})
			 SELECT g.as_scorer, ${bucket}, g.battery_id, g.test_code, g.field, COALESCE(g.first_label, ''), COALESCE(g.second_label, ''), ${sums}
			   FROM (${asScorers}) g
			  GROUP BY 1, 2, 3, 4, 5, 6, 7
			 ON DUPLICATE KEY UPDATE ${update}`,
			p,
			t
		);
	}
	await exec(
		`INSERT INTO agreement_pair_daily (field, day, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label, ${cols})
		 SELECT g.field, DATE(g.entered_at), g.first_scorer_id, g.second_scorer_id, g.battery_id, g.test_code, COALESCE(g.first_label, ''), COALESCE(g.second_label, ''), ${sums}
		   FROM agreement_pairs g WHERE ${gWhere}
		  GROUP BY 1, 2, 3, 4, 5, 6, 7, 8
		 ON DUPLICATE KEY UPDATE ${update}`,
		p,
		t
	);
}

/** Rebuild the daily sums from the row-level tables (after a bulk load, or to repair). */
export async function rebuildDailySums(t?: Transaction | null): Promise<void> {
	for (const table of ['audit_daily', 'agreement_daily', 'agreement_weekly', 'agreement_pair_daily']) await exec(`DELETE FROM ${table}`, {}, t);
	await applyToDaily('all', 1, t);
}

/** Multi-row INSERT with positional replacements, in chunks. */
export async function insertMany(table: string, columns: string[], rows: unknown[][], t?: Transaction | null, chunk = 500): Promise<void> {
	for (let i = 0; i < rows.length; i += chunk) {
		const part = rows.slice(i, i + chunk);
		const params: Record<string, unknown> = {};
		const tuples = part.map((row, r) => {
			const names = row.map((v, c) => {
				const name = `v${r}_${c}`;
				params[name] = v;
				return `:${name}`;
			});
			return `(${names.join(',')})`;
		});
		await exec(`INSERT INTO ${table} (${columns.join(',')}) VALUES ${tuples.join(',')}`, params, t);
	}
}

interface DiscrepancyRow {
	id: number;
	protocol_id: number;
	round: number;
	test_code: string;
	field: Field;
	pass: 'first' | 'second' | 'both';
	kind: string;
	value: string | null;
	other: string | null;
	resolution: string | null;
	resolved_value: string | null;
	expected: string | null;
	carried_from: number | null;
	battery_id: number;
}

/** Whether an entered value is the kept one: numerically equal when both are numbers, else as written. */
export function sameValue(v: string | null | undefined, kept: string | null | undefined, field: Field): boolean {
	const a = isEntered(v) ? String(v).trim() : null;
	const b = isEntered(kept) ? String(kept).trim() : null;
	if (a === null || b === null) return a === b;
	const x = numeric(a, field);
	const y = numeric(b, field);
	if (x !== null && y !== null) return Math.abs(x - y) < 1e-9;
	return a === b;
}

/**
 * Which passes a resolved discrepancy counts against (the attribution rule):
 * the kept value is resolved_value; a pass counts when its own value differs from it, and only the
 * passes the discrepancy is about count (`both` → each of the two; `first`/`second` → that one).
 * For `both`, `value` is the first pass's entry and `other` the second's; for a single pass,
 * `value` is that pass's entry.
 */
export function attributedPasses(d: Pick<DiscrepancyRow, 'pass' | 'value' | 'other' | 'resolution' | 'resolved_value' | 'field'>): Array<'first' | 'second'> {
	if (d.resolution === null || d.resolution === undefined) return [];
	const kept = d.resolved_value;
	if (d.pass === 'both') {
		const out: Array<'first' | 'second'> = [];
		if (!sameValue(d.value, kept, d.field)) out.push('first');
		if (!sameValue(d.other, kept, d.field)) out.push('second');
		return out;
	}
	return sameValue(d.value, kept, d.field) ? [] : [d.pass];
}

/**
 * A discrepancy was resolved (or its resolution changed): rewrite its error_events rows, one per
 * scorer whose value was not kept. An unresolved discrepancy ends with no rows.
 */
export async function recordResolution(discrepancyId: number, t: Transaction): Promise<void> {
	const d = await selectOne<DiscrepancyRow>(
		`SELECT d.id, d.protocol_id, d.round, d.test_code, d.field, d.pass, d.kind, d.value, d.other,
		        d.resolution, d.resolved_value, d.expected, d.carried_from, p.battery_id
		   FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id
		  WHERE d.id = :discrepancyId`,
		{ discrepancyId },
		t
	);
	if (!d) throw new Error(`recordResolution: discrepancy ${discrepancyId} does not exist`);
	await exec('DELETE FROM error_events WHERE discrepancy_id = :discrepancyId', { discrepancyId }, t);
	// A later round decided this field again (reopen, amendment): its decision replaces the earlier
	// round's, so the earlier round's charges for it go (an error is counted once).
	if (d.carried_from !== null && d.resolution !== null) await exec('DELETE FROM error_events WHERE discrepancy_id = :c', { c: d.carried_from }, t);
	const against = attributedPasses(d);
	if (against.length === 0) return;
	// The kept value contradicts the recomputation: the charge rests on the reviewer's judgement.
	const judgement = d.expected !== null && !sameValue(d.resolved_value, d.expected, d.field) ? 1 : 0;

	const passes = await select<{ which: 'first' | 'second'; scorer_id: number; submitted_at: Date | string | null }>(
		'SELECT which, scorer_id, submitted_at FROM passes WHERE protocol_id = :protocolId AND round = :round',
		{ protocolId: d.protocol_id, round: d.round },
		t
	);
	const domain = (await domainsFor([d.test_code], t)).get(d.test_code) ?? 'unknown';
	for (const which of against) {
		const pass = passes.find((p) => p.which === which);
		if (!pass) continue;
		await exec(
			`INSERT INTO error_events (discrepancy_id, protocol_id, scorer_id, battery_id, test_code, domain, field, kind, entered_at, judgement)
			 VALUES (:discrepancyId, :protocolId, :scorerId, :batteryId, :testCode, :domain, :field, :kind, :enteredAt, :judgement)
			 ON DUPLICATE KEY UPDATE kind = VALUES(kind), field = VALUES(field), entered_at = VALUES(entered_at), judgement = VALUES(judgement)`,
			{
				discrepancyId,
				protocolId: d.protocol_id,
				scorerId: pass.scorer_id,
				batteryId: d.battery_id,
				testCode: d.test_code,
				domain,
				field: d.field,
				kind: d.kind,
				enteredAt: pass.submitted_at ? new Date(pass.submitted_at) : new Date(),
				judgement
			},
			t
		);
	}
}

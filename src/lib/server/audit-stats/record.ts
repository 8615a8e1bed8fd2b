/**
 * Keeping the audit's summary rows up to date. The workflow calls these inside its own
 * transactions, so the summaries commit (or roll back) with the change that caused them:
 *
 *   recordSubmission(protocolId, round, t)  once both passes of the round are submitted
 *                                           → audit_fields, agreement_pairs (row level) and the
 *                                             daily sums audit_daily, agreement_daily,
 *                                             agreement_weekly, agreement_pair_daily and the
 *                                             pre-binned agreement_values (00031)
 *   recordResolution(discrepancyId, t)      after a discrepancy row was resolved (or re-resolved)
 *                                           → error_events
 *
 * Both are idempotent: they delete what they wrote before for the same round / discrepancy (and
 * subtract it from the daily sums) and write it again from the current rows.
 *
 * The daily sums are append-only on this path (issue 18): a round's sums (or, recorded again, its
 * old sums negated) are appended to the `_delta` table beside each summary, never added to the
 * summary row in place, so concurrent submits of one day do not wait on one hot row until the
 * other commits. The reports add summary and delta rows (sql.ts, `sumWithDeltas`); `foldDeltas()`,
 * run by the worker, moves delta rows into the summaries without changing any sum, and adds the
 * weekly and pair-daily ones to the whole-range totals too (sql.ts, TOTALS; 00031).
 */
import type { InferCreationAttributes, Transaction } from 'sequelize';
import { exec, select, selectOne, jsonValue, transaction, pipeline, guardedInserts, sqlTime, IN_TX, type Piped } from '../db';
import { labelFor } from '../../scoring/labels';
import { parseEntered, FIELDS, type Field, type DerivedField } from '../../scoring/scales';
import { models } from '../models';
import { AgreementPair, AuditField, ErrorEvent, SUMMARY_MODELS } from '../models/audit-stats';
import type { StatField } from '../models/audit-stats';
import { SUMMARIES, SUMMARY_TABLES, TOTALS, TOTAL_TABLES, type SummaryTable } from './sql';

/** A pass's scores as stored (`passes.scores`): code → field → value. */
export type PassScores = Record<string, Partial<Record<Field | 'sum', string | number | null>>>;

/** What recordSubmission reads of a pass (columns of `passes`). */
type PassRead = {
	id: number;
	fields_entered: number;
	which: 'first' | 'second';
	scorer_id: number;
	status: string;
	scores: unknown;
	submitted_at: Date | string | null;
};

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

/**
 * The audit's domain of a composite's fields. A composite is a field group of its own on the Audit
 * screen ("Composites"), not filed under one of its parts' domains: its parts often come from
 * several domains, picking one would be arbitrary, and filing it under each would count its fields
 * (and errors) more than once, so the domain table would no longer add up to the overall figures.
 * The leading underscore keeps it apart from every catalog domain code (`CODE_RE` starts with a
 * letter or digit).
 */
export const COMPOSITE_DOMAIN = '_composites';
export const COMPOSITE_DOMAIN_NAME = 'Composites';

/**
 * The audit's domain of a scored code. Every code in a pass's scores is one of the protocol's tests
 * or composites (`cleanScores` refuses any other), so a code that is not a test is a composite.
 */
export function domainOf(domains: Map<string, string>, code: string): string {
	return domains.get(code) ?? COMPOSITE_DOMAIN;
}

/**
 * The fields one test or composite of a pass counts in the audit: its raw score, and as derived its
 * derived scores plus — for a composite — the sum of its parts (the scorer's own arithmetic, which
 * the review checks and charges like a derived score). So the per-test rows add up to the pass's own
 * `fields_entered` (which counts the sums too) and the "Raw and derived scores" table counts what its
 * errors count (errors.ts classes every field but `raw` as derived).
 */
export function fieldCounts(values: Partial<Record<Field | 'sum', unknown>> | undefined): { raw: number; derived: number } {
	const v = values ?? {};
	const raw = isEntered(v.raw) ? 1 : 0;
	const derived = FIELDS.filter((f) => f !== 'raw' && isEntered(v[f])).length + (isEntered(v.sum) ? 1 : 0);
	return { raw, derived };
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

/** Whether a round was recorded before (rows in audit_fields or agreement_pairs). Raw SQL: one look-up answers for both tables. */
export async function roundRecorded(protocolId: number, round: number, t: Transaction): Promise<boolean> {
	const earlier = await selectOne<{ n: number }>(
		`SELECT EXISTS (SELECT 1 FROM audit_fields WHERE protocol_id = :protocolId AND round = :round)
		      + EXISTS (SELECT 1 FROM agreement_pairs WHERE protocol_id = :protocolId AND round = :round) AS n`,
		{ protocolId, round },
		t
	);
	return Number(earlier?.n ?? 1) > 0;
}

/** What the second submit has already read, under the protocol's lock, in the same transaction (each read here when absent). */
export interface SubmissionReads {
	/** Both passes of the round, as stored now (after the submit's own update). */
	passes: PassRead[];
	batteryId: number;
	/** `roundRecorded()` */
	earlier: boolean;
	/** `testDomains()` of the protocol */
	domains: Map<string, string>;
}

/** `domainsFor` the codes of a protocol's tests, without reading them first (a subquery names them). */
export async function testDomains(protocolId: number, t: Transaction): Promise<Map<string, string>> {
	const rows = await select<{ code: string; domain: string }>(
		`SELECT code, domain FROM tests
		  WHERE code IN (SELECT t.code FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id WHERE pt.protocol_id = :protocolId)
		  ORDER BY is_current ASC, version ASC`,
		{ protocolId },
		t
	);
	const out = new Map<string, string>();
	for (const r of rows) out.set(r.code, r.domain); // current (or latest) version wins, as in domainsFor
	return out;
}

/**
 * Both passes of a round are submitted: write one audit_fields row per pass × test (fields that
 * scorer entered) and one agreement_pairs row per test × field that either pass entered, and append
 * their sums to the daily `_delta` tables — `submissionWrites`, in one `pipeline` (one round trip).
 * The second submit sends the same statements in its own last batch (it has read what is read here).
 */
export async function recordSubmission(protocolId: number, round: number, t: Transaction, known?: SubmissionReads): Promise<void> {
	await pipeline(t, submissionWrites(protocolId, round, known ?? (await submissionReads(protocolId, round, t))));
}

/** What recordSubmission needs of the database when the caller has not read it. */
async function submissionReads(protocolId: number, round: number, t: Transaction): Promise<SubmissionReads> {
	const passes = await select<PassRead & { battery_id: number }>(
		`SELECT s.id, s.which, s.scorer_id, s.status, s.scores, s.fields_entered, s.submitted_at, p.battery_id
		   FROM passes s JOIN protocols p ON p.id = s.protocol_id
		  WHERE s.protocol_id = :protocolId AND s.round = :round`,
		{ protocolId, round },
		t
	);
	const codes = new Set(passes.flatMap((p) => Object.keys(jsonValue<PassScores>(p.scores) ?? {})));
	return {
		passes,
		batteryId: Number(passes[0]?.battery_id ?? 0),
		earlier: await roundRecorded(protocolId, round, t),
		domains: await domainsFor([...codes], t)
	};
}

/**
 * recordSubmission's writes as statements for a `pipeline`, every one guarded (`IN_TX`, ../db), so
 * they may follow other statements of the batch: a round recorded before (`earlier`) first takes its
 * old rows out of the sums (negated appends, then the DELETEs); then the audit_fields rows, the
 * agreement_pairs rows and the round's sums appended to the `_delta` tables (`dailyDeltas`, which read
 * the rows just inserted: the server runs a batch in order). Throws unless both passes are submitted.
 */
export function submissionWrites(protocolId: number, round: number, r: SubmissionReads): Piped[] {
	const first = r.passes.find((p) => p.which === 'first');
	const second = r.passes.find((p) => p.which === 'second');
	if (!first || !second || first.status !== 'submitted' || second.status !== 'submitted') {
		throw new Error(`recordSubmission: protocol ${protocolId} round ${round} does not have two submitted passes`);
	}
	const s1 = jsonValue<PassScores>(first.scores) ?? {};
	const s2 = jsonValue<PassScores>(second.scores) ?? {};
	const enteredAt = (p: PassRead) => (p.submitted_at ? new Date(p.submitted_at) : new Date());
	const roundAt = new Date(Math.max(enteredAt(first).getTime(), enteredAt(second).getTime()));
	const where = { protocol_id: protocolId, round, battery_id: r.batteryId };
	const fieldRows = [first, second].flatMap((pass) =>
		auditFieldRows(
			where,
			// named one by one: a pass may be a model instance (the second submit's reads), whose attributes a spread does not copy
			{ id: pass.id, which: pass.which, scorer_id: pass.scorer_id, fields_entered: Number(pass.fields_entered) || 0, entered_at: enteredAt(pass) },
			pass === first ? s1 : s2,
			r.domains
		)
	);
	const pairRows = agreementPairRows(where, { scorer_id: first.scorer_id, scores: s1 }, { scorer_id: second.scorer_id, scores: s2 }, r.domains, roundAt);
	// entered_at as UTC text (sqlTime): the driver, called directly, would write a Date in the process's zone
	const values = <R extends { entered_at: Date }>(row: R, columns: readonly (keyof R)[]) =>
		columns.map((c) => (c === 'entered_at' ? sqlTime(row.entered_at) : row[c]));
	const scope = { protocolId, round };
	return [
		...(r.earlier
			? [
					...dailyDeltas(scope, -1),
					{ sql: `DELETE FROM audit_fields WHERE protocol_id = ? AND round = ? AND ${IN_TX}`, values: [protocolId, round] },
					{ sql: `DELETE FROM agreement_pairs WHERE protocol_id = ? AND round = ? AND ${IN_TX}`, values: [protocolId, round] }
				]
			: []),
		...guardedInserts(
			'audit_fields',
			AUDIT_FIELDS_COLUMNS,
			'pass_id',
			fieldRows.map((row) => values(row, AUDIT_FIELDS_COLUMNS))
		),
		...guardedInserts(
			'agreement_pairs',
			AGREEMENT_PAIRS_COLUMNS,
			'protocol_id',
			pairRows.map((row) => values(row, AGREEMENT_PAIRS_COLUMNS))
		),
		...dailyDeltas(scope, 1)
	];
}

/** An audit_fields row, as `recordSubmission` writes it (and the bench's seed, scripts/bench/audit-seed.ts). */
export type AuditFieldRow = InferCreationAttributes<AuditField>;
/** An agreement_pairs row without its id. */
export type AgreementPairRow = Omit<InferCreationAttributes<AgreementPair>, 'id'>;
/** An error_events row without its id. */
export type ErrorEventRow = Omit<InferCreationAttributes<ErrorEvent>, 'id'>;

/** The protocol round the row-level rows belong to. */
type RoundRows = { protocol_id: number; round: number; battery_id: number };

/**
 * The audit_fields rows of one submitted pass: the whole pass (test_code '', its `fields_entered`: the
 * workflow's own count, the denominator of the overall rates), then one per test or composite with a
 * field entered (`fieldCounts`), in its audit domain (`domainOf`).
 */
export function auditFieldRows(
	r: RoundRows,
	pass: { id: number; which: 'first' | 'second'; scorer_id: number; fields_entered: number; entered_at: Date },
	scores: PassScores,
	domains: Map<string, string>
): AuditFieldRow[] {
	const common = { pass_id: pass.id, ...r, which: pass.which, scorer_id: pass.scorer_id, entered_at: pass.entered_at };
	const rows: AuditFieldRow[] = [{ ...common, test_code: '', domain: '', fields_entered: pass.fields_entered, raw_fields: 0, derived_fields: 0 }];
	for (const code of Object.keys(scores)) {
		const { raw, derived } = fieldCounts(scores[code]);
		if (raw + derived === 0) continue;
		rows.push({ ...common, test_code: code, domain: domainOf(domains, code), fields_entered: raw + derived, raw_fields: raw, derived_fields: derived });
	}
	return rows;
}

/** The agreement_pairs rows of a round: one per test or composite × field that either pass entered, dated `at` (the later submit). */
export function agreementPairRows(
	r: RoundRows,
	first: { scorer_id: number; scores: PassScores },
	second: { scorer_id: number; scores: PassScores },
	domains: Map<string, string>,
	at: Date
): AgreementPairRow[] {
	const rows: AgreementPairRow[] = [];
	for (const code of new Set([...Object.keys(first.scores), ...Object.keys(second.scores)])) {
		for (const field of FIELDS) {
			const a = first.scores[code]?.[field];
			const b = second.scores[code]?.[field];
			if (!isEntered(a) && !isEntered(b)) continue;
			const x = numeric(a, field);
			const y = numeric(b, field);
			rows.push({
				...r,
				test_code: code,
				domain: domainOf(domains, code),
				field,
				first_scorer_id: first.scorer_id,
				second_scorer_id: second.scorer_id,
				first_value: x,
				second_value: y,
				first_label: bandOf(field, x),
				second_label: bandOf(field, y),
				entered_at: at
			});
		}
	}
	return rows;
}

/** The columns of the rows above, in one order, for a multi-row INSERT of value lists (the bench's seed). */
export const AUDIT_FIELDS_COLUMNS: readonly (keyof AuditFieldRow)[] = [
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
export const AGREEMENT_PAIRS_COLUMNS: readonly (keyof AgreementPairRow)[] = [
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
export const ERROR_EVENTS_COLUMNS: readonly (keyof ErrorEventRow)[] = [
	'discrepancy_id',
	'protocol_id',
	'scorer_id',
	'battery_id',
	'test_code',
	'domain',
	'field',
	'kind',
	'entered_at',
	'judgement'
];

/** A row of the types above as the value list of `columns`. */
export const rowValues = <R>(row: R, columns: readonly (keyof R)[]): unknown[] => columns.map((c) => row[c]);

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
 * Add (sign 1) or subtract (sign −1) the row-level rows of one protocol round (or of a range of
 * protocol ids, for a rebuild) in audit_fields / agreement_pairs to the daily sums, appended to the
 * `_delta` tables (`dailyDeltas`) in one `pipeline`; without a transaction, in one of its own (the five
 * appends belong together).
 */
export async function applyToDaily(
	scope: { protocolId: number; round: number } | { fromProtocol: number; toProtocol: number },
	sign: 1 | -1,
	t?: Transaction | null
): Promise<void> {
	if (!t) return transaction((tx) => applyToDaily(scope, sign, tx));
	await pipeline(t, dailyDeltas(scope, sign));
}

/**
 * The appends of `applyToDaily`, one statement per `_delta` table: plain INSERTs, no hot row; the
 * worker's fold (`foldDeltas`) moves them into the summaries. Raw SQL: INSERT … SELECT … GROUP BY adds
 * up a round in the database in one statement per table. Guarded for a `pipeline` (`… WHERE … AND
 * ${IN_TX}`): outside the transaction the SELECT finds no row and nothing is appended. These tables
 * have an AUTO_INCREMENT id, so each statement takes the table's AUTO-INC lock while it runs (an
 * INSERT … SELECT always did; db.ts, GUARDED).
 */
export function dailyDeltas(scope: { protocolId: number; round: number } | { fromProtocol: number; toProtocol: number }, sign: 1 | -1): Piped[] {
	if (sign !== 1 && sign !== -1) throw new Error('dailyDeltas: sign is 1 or -1'); // written into the SQL as a number
	// A rebuild's slice groups up to a few hundred thousand rows per statement: let that grouping stay
	// in memory (up to 256 MB for this statement only). Grouped in an on-disk temporary table, it failed
	// on this MariaDB 10.11 ("Error on delete of '/tmp/#sql-temptable….MAI'", errno 6) on the bench's
	// data and on audit-rebuild.test.ts's 100,000 pairs in 45 protocols (agreement_values, 226,800 groups).
	const inMemory = 'fromProtocol' in scope ? 'SET STATEMENT tmp_table_size = 268435456, max_heap_table_size = 268435456 FOR ' : '';
	const values = 'fromProtocol' in scope ? [scope.fromProtocol, scope.toProtocol] : [scope.protocolId, scope.round];
	const whereOf = (alias: string) =>
		('fromProtocol' in scope ? `${alias}.protocol_id BETWEEN ? AND ?` : `${alias}.protocol_id = ? AND ${alias}.round = ?`) + ` AND ${IN_TX}`;
	const out: Piped[] = [
		{
			sql: `${inMemory}INSERT INTO audit_daily_delta (day, scorer_id, battery_id, test_code, domain, passes, fields_entered, raw_fields, derived_fields)
			 SELECT DATE(a.entered_at), a.scorer_id, a.battery_id, a.test_code, MAX(a.domain), ${sign} * COUNT(*), ${sign} * SUM(a.fields_entered),
			        ${sign} * SUM(a.raw_fields), ${sign} * SUM(a.derived_fields)
			   FROM audit_fields a WHERE ${whereOf('a')}
			  GROUP BY DATE(a.entered_at), a.scorer_id, a.battery_id, a.test_code`,
			values
		}
	];
	const gWhere = whereOf('g');
	const cols = MEASURES.map(([c]) => c).join(', ');
	const sums = MEASURES.map(([, e]) => `${sign} * ${e}`).join(', ');
	const buckets: Array<[SummaryTable, string, string]> = [
		['agreement_daily', 'day', 'DATE(g.entered_at)'],
		['agreement_weekly', 'week', 'DATE_SUB(DATE(g.entered_at), INTERVAL WEEKDAY(g.entered_at) DAY)']
	];
	// each pair counts three times — for everyone (scorer 0), for its first and for its second scorer —
	// in one statement per table: joined to three constant rows, not a UNION ALL of three copies of
	// the pairs (which MariaDB materialises: 2–3 times slower on a rebuild's slice)
	const asScorer = 'CASE r.k WHEN 0 THEN 0 WHEN 1 THEN g.first_scorer_id ELSE g.second_scorer_id END';
	const threeTimes = `agreement_pairs g JOIN (SELECT 0 AS k UNION ALL SELECT 1 UNION ALL SELECT 2) r`;
	for (const [table, col, bucket] of buckets) {
		out.push({
			sql: `${inMemory}INSERT INTO ${table}_delta (scorer_id, ${col}, battery_id, test_code, field, first_label, second_label, ${cols})
			 SELECT ${asScorer}, ${bucket}, g.battery_id, g.test_code, g.field, COALESCE(g.first_label, ''), COALESCE(g.second_label, ''), ${sums}
			   FROM ${threeTimes} WHERE ${gWhere}
			  GROUP BY 1, 2, 3, 4, 5, 6, 7`,
			values
		});
	}
	out.push({
		sql: `${inMemory}INSERT INTO agreement_pair_daily_delta (field, day, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label, ${cols})
		 SELECT g.field, DATE(g.entered_at), g.first_scorer_id, g.second_scorer_id, g.battery_id, g.test_code, COALESCE(g.first_label, ''), COALESCE(g.second_label, ''), ${sums}
		   FROM agreement_pairs g WHERE ${gWhere}
		  GROUP BY 1, 2, 3, 4, 5, 6, 7, 8`,
		values
	});
	// the Bland–Altman points pre-binned (00031): pairs both passes entered, for everyone (0) and for
	// each scorer once (the report's scorer filter matches either pass)
	out.push({
		sql: `${inMemory}INSERT INTO agreement_values_delta (scorer_id, field, battery_id, test_code, first_value, second_value, pairs)
		 SELECT ${asScorer}, g.field, g.battery_id, g.test_code, g.first_value, g.second_value, ${sign} * COUNT(*)
		   FROM ${threeTimes} ON r.k < 2 OR g.second_scorer_id <> g.first_scorer_id
		  WHERE ${gWhere} AND g.first_value IS NOT NULL AND g.second_value IS NOT NULL
		  GROUP BY 1, 2, 3, 4, 5, 6`,
		values
	});
	return out;
}

/**
 * Rebuild the daily sums from the row-level tables (after a bulk load, or to repair): empty them,
 * append every protocol's sums to the delta tables `slice` protocol ids at a time, and fold them in
 * as the worker does. Not one INSERT … SELECT … GROUP BY … ON DUPLICATE KEY UPDATE over everything:
 * on MariaDB 10.11 that statement failed ("Error on delete of '…#sql-temptable….MAI'", errno 6) on the
 * bench's seed of about 1M entered fields, whose grouping outgrew the 16 MB in-memory temporary table
 * (by hand: 45,640 groups of agreement_weekly failed, 33,976 passed, and a 1 GB temporary table or no
 * upsert made it pass; not every data shape triggers it), and it held one transaction for minutes.
 * Each slice (a plain INSERT) and each fold batch groups a bounded number of rows. Run it while no
 * submit is recorded (a bulk load, a repair).
 */
export async function rebuildDailySums(opts: { slice?: number; foldBatch?: number } = {}): Promise<void> {
	const slice = opts.slice ?? 2000;
	for (const table of SUMMARY_TABLES) {
		await exec(`DELETE FROM ${table}`);
		await exec(`DELETE FROM ${table}_delta`);
	}
	for (const table of TOTAL_TABLES) await exec(`DELETE FROM ${table}`);
	// slices of `slice` protocol ids from the next id present (ids can be sparse)
	for (let after = -1; ;) {
		const next = await selectOne<{ id: number | null }>(
			`SELECT LEAST(COALESCE((SELECT MIN(protocol_id) FROM audit_fields WHERE protocol_id > :after), 4294967295),
			              COALESCE((SELECT MIN(protocol_id) FROM agreement_pairs WHERE protocol_id > :after), 4294967295)) AS id`,
			{ after }
		);
		const from = Number(next?.id ?? 4294967295);
		if (from >= 4294967295) break;
		after = from + slice - 1;
		await transaction((t) => applyToDaily({ fromProtocol: from, toProtocol: after }, 1, t));
	}
	// 10,000 delta rows a batch: its grouping stays in memory (under 16 MB)
	await foldDeltas(opts.foldBatch ?? 10_000);
}

/**
 * Move delta rows into their summaries, at most `limit` per table per transaction, until none are
 * left; returns how many were moved. The delta rows are locked first (a locking read waits for a
 * submit still writing one), then added to the summary rows and deleted by id in the same
 * transaction, so every reader sees each row exactly once, in the delta table or in the summary.
 * The delta rows are read and deleted through their models; the fold itself is raw SQL.
 */
export async function foldDeltas(limit = 5000): Promise<number> {
	models();
	let moved = 0;
	for (const table of SUMMARY_TABLES) {
		const { keys, extra, measures } = SUMMARIES[table];
		for (;;) {
			const n = await transaction(async (t) => {
				const delta = SUMMARY_MODELS[table].delta;
				const ids = (await delta.findAll({ attributes: ['id'], order: [['id', 'ASC']], limit: Number(limit), lock: t.LOCK.UPDATE, transaction: t })).map((r) =>
					Number(r.get('id'))
				);
				if (ids.length === 0) return 0;
				// raw SQL: one INSERT … SELECT … GROUP BY … ON DUPLICATE KEY UPDATE folds the batch
				await exec(
					`INSERT INTO ${table} (${[...keys, ...extra, ...measures].join(', ')})
					 SELECT ${[...keys, ...extra.map((c) => `MAX(${c})`), ...measures.map((c) => `SUM(${c})`)].join(', ')}
					   FROM ${table}_delta WHERE id IN (:ids)
					  GROUP BY ${keys.join(', ')}
					 ON DUPLICATE KEY UPDATE ${measures.map((c) => `${c} = ${c} + VALUES(${c})`).join(', ')}`,
					{ ids },
					t
				);
				// the whole-range totals folded from this summary (sql.ts, TOTALS): the same rows without their date
				for (const total of TOTAL_TABLES.filter((x) => TOTALS[x].from === table)) {
					const totalKeys = TOTALS[total].keys;
					await exec(
						`INSERT INTO ${total} (${[...totalKeys, ...measures].join(', ')})
						 SELECT ${[...totalKeys, ...measures.map((c) => `SUM(${c})`)].join(', ')}
						   FROM ${table}_delta WHERE id IN (:ids)
						  GROUP BY ${totalKeys.join(', ')}
						 ON DUPLICATE KEY UPDATE ${measures.map((c) => `${c} = ${c} + VALUES(${c})`).join(', ')}`,
						{ ids },
						t
					);
				}
				await delta.destroy({ where: { id: ids }, transaction: t });
				return ids.length;
			});
			moved += n;
			if (n < limit) break;
		}
	}
	return moved;
}

/** Multi-row INSERT with positional replacements, in chunks. */
export async function insertMany(table: string, columns: readonly string[], rows: unknown[][], t?: Transaction | null, chunk = 500): Promise<void> {
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

/** What recordResolution reads of a discrepancy (columns of `discrepancies`, and its protocol's battery). */
export type DiscrepancyRead = {
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
};

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
export function attributedPasses(d: Pick<DiscrepancyRead, 'pass' | 'value' | 'other' | 'resolution' | 'resolved_value' | 'field'>): Array<'first' | 'second'> {
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
	const d = await selectOne<DiscrepancyRead>(
		`SELECT d.id, d.protocol_id, d.round, d.test_code, d.field, d.pass, d.kind, d.value, d.other,
		        d.resolution, d.resolved_value, d.expected, d.carried_from, p.battery_id
		   FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id
		  WHERE d.id = :discrepancyId`,
		{ discrepancyId },
		t
	);
	if (!d) throw new Error(`recordResolution: discrepancy ${discrepancyId} does not exist`);
	models();
	// A later round decided this field again (reopen, amendment): its decision replaces the earlier
	// round's, so the earlier round's charges for it go (an error is counted once).
	await ErrorEvent.destroy({ where: { discrepancy_id: replacedCharges(d) }, transaction: t });
	if (attributedPasses(d).length === 0) return;
	const passes = await select<ResolutionPass>(
		'SELECT which, scorer_id, submitted_at FROM passes WHERE protocol_id = :protocolId AND round = :round',
		{ protocolId: d.protocol_id, round: d.round },
		t
	);
	const domain = domainOf(await domainsFor([d.test_code], t), d.test_code);
	const events = errorEventRows(d, passes, domain);
	// the same scorer on both passes would be one row (UNIQUE discrepancy_id, scorer_id): the later one wins
	if (events.length) await ErrorEvent.bulkCreate(events, { transaction: t, updateOnDuplicate: ['kind', 'field', 'entered_at', 'judgement'] });
}

/** What the error events of a decision need of its round's passes. */
export type ResolutionPass = { which: 'first' | 'second'; scorer_id: number; submitted_at: Date | string | null };

/** The discrepancies whose error_events a decision of `d` replaces: its own, and the earlier round's it was carried from. */
export const replacedCharges = (d: Pick<DiscrepancyRead, 'id' | 'carried_from' | 'resolution'>): number[] =>
	d.carried_from !== null && d.resolution !== null ? [d.id, d.carried_from] : [d.id];

/**
 * The error_events rows of a resolved discrepancy (`recordResolution` writes them; the resolution's
 * hot path, `resolveDiscrepancy`, sends the same rows with its other writes): one per pass whose value
 * was not kept.
 */
export function errorEventRows(d: DiscrepancyRead, passes: ResolutionPass[], domain: string): ErrorEventRow[] {
	const against = attributedPasses(d);
	// The kept value contradicts the recomputation: the charge rests on the reviewer's judgement.
	const judgement = d.expected !== null && !sameValue(d.resolved_value, d.expected, d.field) ? 1 : 0;
	return against.flatMap((which) => {
		const pass = passes.find((p) => p.which === which);
		if (!pass) return [];
		return [
			{
				discrepancy_id: d.id,
				protocol_id: d.protocol_id,
				scorer_id: pass.scorer_id,
				battery_id: d.battery_id,
				test_code: d.test_code,
				domain,
				field: d.field as StatField,
				kind: d.kind,
				entered_at: pass.submitted_at ? new Date(pass.submitted_at) : new Date(),
				judgement: judgement as 0 | 1
			}
		];
	});
}

/**
 * Invented double-entry history for the audit benchmark and screenshots: protocols of the demo
 * catalog (core-adult and brief-screen), two passes each with realistic slips at scorer-specific
 * rates and kinds, discrepancies from the real reconciler, resolutions (the reviewer keeps the
 * recomputed value, or the right raw score), and the audit summaries (audit_fields,
 * agreement_pairs, error_events) computed with the same helpers record.ts uses.
 *
 * Everything is written with multi-row INSERTs built with the connector's escaping, ~2,000 rows a
 * statement. All names and numbers are invented.
 */
import { QueryTypes } from 'sequelize';
import { db, select, selectOne } from '../../src/lib/server/db';
import { reconcile, type NormDef, type TestDef, type PassInput } from '../../src/lib/scoring';
import { formatReference, referenceScore, roundTo, zFromRaw, DERIVED_FIELDS, type DerivedField, type Field } from '../../src/lib/scoring/scales';
import { DEMO_BANDS, DEMO_TESTS } from '../../db/seeds/catalog';
import {
	agreementPairRows,
	auditFieldRows,
	domainOf,
	errorEventRows,
	rebuildDailySums,
	rowValues,
	AUDIT_FIELDS_COLUMNS,
	AGREEMENT_PAIRS_COLUMNS,
	ERROR_EVENTS_COLUMNS
} from '../../src/lib/server/audit-stats/record';
import { discrepancyValues, DISCREPANCY_COLUMNS } from '../../src/lib/server/protocols/passes';
import { rng } from './prng';

interface Profile {
	email: string;
	name: string;
	/** Slips per field entered at the start and at the end of the period. */
	rateStart: number;
	rateEnd: number;
	/** Relative weights of slip kinds. */
	kinds: Partial<Record<Slip, number>>;
	/** Share of protocols (relative weight) and the fraction of the period when they started. */
	volume: number;
	startsAt?: number;
}

type Slip =
	| 'transposition'
	| 'sign_flip'
	| 'wrong_norm_group'
	| 'wrong_scale'
	| 'decimal_shift'
	| 'rounding'
	| 'digit_drop'
	| 'wrong_digit'
	| 'missing'
	| 'raw_as_derived';

export const PROFILES: Profile[] = [
	{
		email: 'sam.scorer@demo.crosstally.test',
		name: 'Sam Okafor',
		rateStart: 0.034,
		rateEnd: 0.011,
		volume: 1.3,
		kinds: { transposition: 6, wrong_digit: 1, rounding: 1, missing: 1 }
	},
	{
		email: 'rae.scorer@demo.crosstally.test',
		name: 'Rae Lindqvist',
		rateStart: 0.01,
		rateEnd: 0.009,
		volume: 1.2,
		kinds: { rounding: 3, wrong_norm_group: 3, transposition: 1, missing: 1 }
	},
	{
		email: 'kit.scorer@demo.crosstally.test',
		name: 'Kit Moreau',
		rateStart: 0.026,
		rateEnd: 0.027,
		volume: 1,
		kinds: { sign_flip: 5, wrong_scale: 2, transposition: 1, decimal_shift: 1 }
	},
	{
		email: 'noor.scorer@demo.crosstally.test',
		name: 'Noor Haddad',
		rateStart: 0.016,
		rateEnd: 0.014,
		volume: 0.9,
		kinds: { wrong_norm_group: 2, transposition: 2, digit_drop: 2, rounding: 1 }
	},
	{
		email: 'tomas.scorer@demo.crosstally.test',
		name: 'Tomás Ferreira',
		rateStart: 0.02,
		rateEnd: 0.018,
		volume: 0.8,
		kinds: { missing: 3, digit_drop: 2, raw_as_derived: 2, transposition: 1 }
	},
	{
		email: 'ines.scorer@demo.crosstally.test',
		name: 'Inês Duarte',
		rateStart: 0.012,
		rateEnd: 0.012,
		volume: 0.25,
		startsAt: 0.8,
		kinds: { transposition: 2, rounding: 2, wrong_scale: 1 }
	}
];
const REVIEWERS = ['rita.reviewer@demo.crosstally.test', 'lee.lead@demo.crosstally.test'];

const TEST_DEFS: TestDef[] = DEMO_TESTS.map((t) => ({
	id: t.code,
	direction: t.direction,
	raw: { min: t.raw[0], max: t.raw[1], decimals: t.raw[2] },
	reported: DERIVED_FIELDS.filter((f) => t.reported.includes(f)),
	bounds: t.bounds ?? null
}));
const TEST_BY_CODE = new Map(TEST_DEFS.map((t) => [t.id, t]));
const DOMAIN = new Map(DEMO_TESTS.map((t) => [t.code, t.domain]));

function normsFor(code: string, band: number, edu13: boolean): { mean: number; sd: number; group: string } {
	const t = DEMO_TESTS.find((x) => x.code === code)!;
	const b = DEMO_BANDS[band];
	if (t.eduNorms) {
		const [mean, sd] = (edu13 ? t.eduNorms.high : t.eduNorms.low)[band];
		return { mean, sd, group: `${b.code}-${edu13 ? 'e13' : 'e0'}` };
	}
	const [mean, sd] = t.norms[band];
	return { mean, sd, group: b.code };
}

const ALL_NORMS: NormDef[] = DEMO_TESTS.flatMap((t) =>
	DEMO_BANDS.flatMap((b, i) =>
		t.eduNorms ? [false, true].map((e) => ({ test: t.code, ...normsFor(t.code, i, e) })) : [{ test: t.code, ...normsFor(t.code, i, false) }]
	)
);

const fmtRaw = (v: number, decimals: number) => (decimals > 0 ? v.toFixed(decimals) : String(Math.round(v)));

function swapAdjacent(s: string, r: () => number): string | null {
	const idx: number[] = [];
	for (let i = 0; i + 1 < s.length; i++) if (/\d/.test(s[i]) && /\d/.test(s[i + 1]) && s[i] !== s[i + 1]) idx.push(i);
	if (!idx.length) return null;
	const i = idx[Math.floor(r() * idx.length)];
	return s.slice(0, i) + s[i + 1] + s[i] + s.slice(i + 2);
}

/** One slipped entry for a field, or null when this slip cannot apply. */
function slip(
	kind: Slip,
	field: Field,
	correct: string,
	ctx: { z: number; zOther: number; zFlip: number; raw: string; test: TestDef },
	r: () => number
): string | null {
	const derived = field === 'raw' ? null : (field as DerivedField);
	switch (kind) {
		case 'transposition':
			return swapAdjacent(correct, r);
		case 'missing':
			return '';
		case 'sign_flip':
			return derived ? formatReference(derived, referenceScore(derived, ctx.zFlip, ctx.test.bounds)) : null;
		case 'wrong_norm_group':
			return derived ? formatReference(derived, referenceScore(derived, ctx.zOther, ctx.test.bounds)) : null;
		case 'wrong_scale': {
			if (!derived || derived === 'z') return null;
			const other: DerivedField = derived === 'standard' ? 't' : derived === 'scaled' ? 'percentile' : derived === 't' ? 'scaled' : 'standard';
			return formatReference(other, referenceScore(other, ctx.z));
		}
		case 'raw_as_derived':
			return derived ? ctx.raw : null;
		case 'decimal_shift': {
			if (field !== 'raw' && field !== 'z') return null; // a moved point is a raw-score or z slip
			const n = Number(correct);
			return n ? String(roundTo(n * 10, 4)) : null;
		}
		case 'rounding':
			if (derived === 'z') return ctx.z.toFixed(1);
			if (!derived) return null;
			return null;
		case 'digit_drop':
			return correct.replace(/\d(?=\d)/, '') === correct ? null : correct.replace(/\d(?=\d)/, '');
		case 'wrong_digit': {
			const m = correct.match(/\d/g);
			if (!m) return null;
			const pos = correct.search(/\d(?!.*\d)/);
			const d = Number(correct[pos]);
			return correct.slice(0, pos) + String((d + 1 + Math.floor(r() * 8)) % 10) + correct.slice(pos + 1);
		}
	}
}

function pickWeighted<T extends string>(weights: Partial<Record<T, number>>, r: () => number): T {
	const entries = Object.entries(weights) as [T, number][];
	const total = entries.reduce((s, [, w]) => s + w, 0);
	let x = r() * total;
	for (const [k, w] of entries) {
		x -= w;
		if (x <= 0) return k;
	}
	return entries[entries.length - 1][0];
}

function gauss(r: () => number): number {
	return Math.sqrt(-2 * Math.log(r() || 1e-12)) * Math.cos(2 * Math.PI * r());
}

const sqlDate = (d: Date) => d.toISOString().replace('T', ' ').replace('Z', '');

async function bulk(table: string, columns: readonly string[], rows: unknown[][], chunk = 2000): Promise<void> {
	const seq = db();
	for (let i = 0; i < rows.length; i += chunk) {
		const values = rows
			.slice(i, i + chunk)
			.map((row) => `(${row.map((v) => (v instanceof Date ? seq.escape(sqlDate(v)) : seq.escape(v as string))).join(',')})`)
			.join(',');
		await seq.query(`INSERT INTO ${table} (${columns.join(',')}) VALUES ${values}`, { raw: true });
	}
}

export interface SeedSummary {
	protocols: number;
	passes: number;
	fieldsEntered: number;
	discrepancies: number;
	errorEvents: number;
	agreementPairs: number;
	seconds: number;
	/** Of `seconds`: generating and inserting the rows (of which inserting), and rebuilding the daily sums. */
	generateAndInsertSeconds: number;
	insertSeconds: number;
	rebuildSeconds: number;
}

/** Protocols generated between two writes: keeps the buffers small at 5M fields. */
const FLUSH_EVERY = 5000;

/** Seed `protocols` invented protocols ending today and spread over `weeks` weeks. Needs the catalog. */
export async function seedAuditData(opts: { protocols: number; weeks?: number; seed?: number; prefix?: string; openShare?: number }): Promise<SeedSummary> {
	const started = Date.now();
	const r = rng(opts.seed ?? 20250214);
	const weeks = opts.weeks ?? 26;
	const prefix = opts.prefix ?? 'AB';
	const openShare = opts.openShare ?? 0.03;

	// Scorers: the seeded three plus three more invented ones.
	for (const p of PROFILES) {
		await db().query(`INSERT IGNORE INTO users (email, name, roles) VALUES (${db().escape(p.email)}, ${db().escape(p.name)}, 'scorer')`, { raw: true });
	}
	const users = await select<{ id: number; email: string }>('SELECT id, email FROM users');
	const uid = new Map(users.map((u) => [u.email, Number(u.id)]));
	const scorerIds = PROFILES.map((p) => uid.get(p.email)!);
	const reviewerIds = REVIEWERS.map((e) => uid.get(e)).filter((x): x is number => !!x);
	if (reviewerIds.length === 0) throw new Error('seed accounts first (rita.reviewer, lee.lead)');

	const batteries = await select<{ id: number; code: string; norm_set_id: number }>('SELECT id, code, norm_set_id FROM batteries');
	const core = batteries.find((b) => b.code === 'core-adult');
	const brief = batteries.find((b) => b.code === 'brief-screen');
	if (!core || !brief) throw new Error('seed the demo catalog first (batteries core-adult and brief-screen)');
	const btests = await select<{ battery_id: number; test_code: string }>('SELECT battery_id, test_code FROM battery_tests ORDER BY battery_id, position');
	const testsOf = (id: number) => btests.filter((b) => b.battery_id === id).map((b) => b.test_code);
	const testIds = new Map((await select<{ id: number; code: string }>('SELECT id, code FROM tests WHERE is_current = 1')).map((t) => [t.code, Number(t.id)]));

	const base = (await selectOne<{ n: number }>('SELECT COALESCE(MAX(id), 0) AS n FROM protocols'))!.n;
	const baseEx = (await selectOne<{ n: number }>('SELECT COALESCE(MAX(id), 0) AS n FROM examinees'))!.n;
	const basePass = (await selectOne<{ n: number }>('SELECT COALESCE(MAX(id), 0) AS n FROM passes'))!.n;
	const baseDisc = (await selectOne<{ n: number }>('SELECT COALESCE(MAX(id), 0) AS n FROM discrepancies'))!.n;

	const end = new Date();
	end.setUTCHours(12, 0, 0, 0);
	const spanMs = weeks * 7 * 86_400_000;
	const volume = PROFILES.map((p) => p.volume);

	const examinees: unknown[][] = [];
	const protocols: unknown[][] = [];
	const ptests: unknown[][] = [];
	const passes: unknown[][] = [];
	const discs: unknown[][] = [];
	const events: unknown[][] = [];
	const fields: unknown[][] = [];
	const pairs: unknown[][] = [];
	let fieldsEntered = 0;
	let discCount = 0;
	let passCount = 0;
	let eventCount = 0;
	let pairCount = 0;
	let insertMs = 0;

	/** Write what the loop has built so far and empty the buffers (bounded memory at 5M fields). */
	const flush = async () => {
		const t0 = Date.now();
		passCount += passes.length;
		eventCount += events.length;
		pairCount += pairs.length;
		await bulk('examinees', ['id', 'code', 'birth_date'], examinees);
		await bulk(
			'protocols',
			[
				'id',
				'examinee_id',
				'battery_id',
				'norm_set_id',
				'test_date',
				'age_text',
				'age_months',
				'status',
				'first_scorer_id',
				'second_scorer_id',
				'reviewer_id',
				'status_changed_at'
			],
			protocols
		);
		await bulk('protocol_tests', ['protocol_id', 'position', 'test_id'], ptests);
		await bulk('passes', ['id', 'protocol_id', 'round', 'which', 'scorer_id', 'status', 'scores', 'fields_entered', 'submitted_at'], passes, 1000);
		await bulk('discrepancies', ['id', ...DISCREPANCY_COLUMNS, 'resolution', 'resolved_value', 'resolved_by', 'resolved_at'], discs);
		await bulk('error_events', ERROR_EVENTS_COLUMNS, events);
		await bulk('audit_fields', AUDIT_FIELDS_COLUMNS, fields);
		await bulk('agreement_pairs', AGREEMENT_PAIRS_COLUMNS, pairs);
		for (const rows of [examinees, protocols, ptests, passes, discs, events, fields, pairs]) rows.length = 0;
		insertMs += Date.now() - t0;
	};

	for (let i = 0; i < opts.protocols; i++) {
		const pid = base + i + 1;
		const exId = baseEx + i + 1;
		const frac = (i + r() * 0.5) / opts.protocols; // time order ~ id order
		const testDate = new Date(end.getTime() - spanMs + frac * spanMs - 5 * 86_400_000);
		// two different scorers active at that time, weighted by volume
		const active = PROFILES.map((p, k) => ((p.startsAt ?? 0) <= frac ? volume[k] : 0));
		const pickScorer = (exclude: number) => {
			const w = active.map((v, k) => (k === exclude ? 0 : v));
			let x = r() * w.reduce((s, v) => s + v, 0);
			for (let k = 0; k < w.length; k++) if ((x -= w[k]) <= 0 && w[k] > 0) return k;
			return w.findIndex((v) => v > 0);
		};
		const a = pickScorer(-1);
		const b = pickScorer(a);
		const reviewer = reviewerIds[Math.floor(r() * reviewerIds.length)];
		const battery = r() < 0.25 ? core : brief;
		const band = 1 + Math.floor(r() * 4);
		const edu13 = r() < 0.55;
		const ageMonths = DEMO_BANDS[band].min + Math.floor(r() * (DEMO_BANDS[band].max - DEMO_BANDS[band].min));
		const birth = new Date(testDate.getTime() - ageMonths * 30.44 * 86_400_000);
		const at1 = new Date(testDate.getTime() + (1 + r() * 2) * 86_400_000);
		const at2 = new Date(at1.getTime() + (0.5 + r() * 3) * 86_400_000);
		const codes = testsOf(battery.id);
		const isOpen = frac > 0.97 && r() < openShare * 20;

		examinees.push([exId, `${prefix}-${String(pid).padStart(6, '0')}`, sqlDate(birth).slice(0, 10)]);
		protocols.push([
			pid,
			exId,
			battery.id,
			battery.norm_set_id,
			sqlDate(testDate).slice(0, 10),
			`${Math.floor(ageMonths / 12)};${ageMonths % 12}`,
			ageMonths,
			isOpen ? 'in_review' : 'verified',
			scorerIds[a],
			scorerIds[b],
			reviewer,
			at2
		]);
		codes.forEach((c, k) => ptests.push([pid, k + 1, testIds.get(c) ?? null]));

		const truth: Record<string, Record<string, string>> = {};
		const ctxs: Record<string, { z: number; zOther: number; zFlip: number; raw: string; test: TestDef }> = {};
		for (const code of codes) {
			const t = TEST_BY_CODE.get(code)!;
			const n = normsFor(code, band, edu13);
			const other = normsFor(code, band + (r() < 0.5 ? -1 : 1), edu13);
			const zt = Math.max(-3, Math.min(3, gauss(r) * 1.05 - 0.2));
			let raw = n.mean + (t.direction === 'lower_better' ? -zt : zt) * n.sd;
			raw = Math.min(t.raw.max, Math.max(t.raw.min, roundTo(raw, t.raw.decimals)));
			const z = zFromRaw(raw, n.mean, n.sd, t.direction);
			const vals: Record<string, string> = { raw: fmtRaw(raw, t.raw.decimals) };
			for (const f of t.reported) vals[f] = formatReference(f, referenceScore(f, z, t.bounds));
			truth[code] = vals;
			ctxs[code] = { z, zOther: zFromRaw(raw, other.mean, other.sd, t.direction), zFlip: -z, raw: vals.raw, test: t };
		}
		const entries = [a, b].map((k) => {
			const prof = PROFILES[k];
			const rate = prof.rateStart + (prof.rateEnd - prof.rateStart) * frac;
			const scores: Record<string, Record<string, string>> = {};
			for (const code of codes) {
				scores[code] = { ...truth[code] };
				for (const field of Object.keys(truth[code]) as Field[]) {
					if (r() >= rate) continue;
					for (let tries = 0; tries < 3; tries++) {
						const v = slip(pickWeighted(prof.kinds, r), field, truth[code][field], ctxs[code], r);
						if (v !== null && v !== truth[code][field]) {
							scores[code][field] = v;
							break;
						}
					}
				}
			}
			return scores;
		});
		// now and then both scorers looked up the same wrong norm group: a shared error
		if (r() < 0.04) {
			const code = codes[Math.floor(r() * codes.length)];
			const t = TEST_BY_CODE.get(code)!;
			const f = t.reported[0];
			const v = formatReference(f, referenceScore(f, ctxs[code].zOther, t.bounds));
			entries[0][code][f] = v;
			entries[1][code][f] = v;
		}
		const passIds = [basePass + 2 * i + 1, basePass + 2 * i + 2];
		const ats = [at1, at2];
		const round = { protocol_id: pid, round: 1, battery_id: battery.id };
		const passesOfRound = [0, 1].map((k) => ({
			which: k === 0 ? ('first' as const) : ('second' as const),
			scorer_id: scorerIds[[a, b][k]],
			submitted_at: ats[k]
		}));
		const counts = entries.map((s) => Object.values(s).reduce((n, vals) => n + Object.values(vals).filter((v) => v !== '').length, 0));
		fieldsEntered += counts[0] + counts[1];
		entries.forEach((s, k) => {
			passes.push([passIds[k], pid, 1, k === 0 ? 'first' : 'second', scorerIds[[a, b][k]], 'submitted', JSON.stringify(s), counts[k], ats[k]]);
			const pass = { ...passesOfRound[k], id: passIds[k], fields_entered: counts[k], entered_at: ats[k] };
			for (const row of auditFieldRows(round, pass, s, DOMAIN)) fields.push(rowValues(row, AUDIT_FIELDS_COLUMNS));
		});
		const [first, second] = entries.map((scores, k) => ({ scorer_id: passesOfRound[k].scorer_id, scores }));
		for (const row of agreementPairRows(round, first, second, DOMAIN, at2)) pairs.push(rowValues(row, AGREEMENT_PAIRS_COLUMNS));
		const result = reconcile({
			tests: codes.map((c) => TEST_BY_CODE.get(c)!),
			norms: ALL_NORMS,
			protocol: { group: DEMO_BANDS[band].code, groups: { 'word-harvest': `${DEMO_BANDS[band].code}-${edu13 ? 'e13' : 'e0'}` } },
			passes: entries.map((s, k) => ({ scorer: String(k), scores: s })) as PassInput[]
		});
		result.discrepancies.forEach((d, pos) => {
			// a composite's discrepancy has no test of its own and no true value here (the seed's batteries
			// produce none; before this guard one would have failed on truth[undefined])
			if (d.test === undefined) return;
			const did = baseDisc + ++discCount;
			const correct = truth[d.test][d.field];
			const value = d.value === null ? null : String(d.value);
			const other = d.other === null ? null : String(d.other);
			const firstV = d.pass === 'second' ? other : value;
			const secondV = d.pass === 'second' ? value : other;
			const resolution = firstV === correct ? 'first' : secondV === correct ? 'second' : d.expected !== null && d.field !== 'raw' ? 'recomputed' : 'other';
			const resolved = !isOpen || r() < 0.3;
			const at = new Date(at2.getTime() + (0.2 + r() * 2) * 86_400_000);
			const row = discrepancyValues({ id: pid, round: 1 }, pos + 1, d);
			discs.push([did, ...row, resolved ? resolution : null, resolved ? correct : null, resolved ? reviewer : null, resolved ? at : null]);
			if (!resolved) return;
			// the error events as recordResolution writes them, from the row as stored (`expected` at its field's precision)
			const expected = row[DISCREPANCY_COLUMNS.indexOf('expected')] as string | null;
			const read = {
				...d,
				id: did,
				protocol_id: pid,
				round: 1,
				test_code: d.test,
				value,
				other,
				expected,
				resolution,
				resolved_value: correct,
				carried_from: null,
				battery_id: battery.id
			};
			for (const e of errorEventRows(read, passesOfRound, domainOf(DOMAIN, d.test))) events.push(rowValues(e, ERROR_EVENTS_COLUMNS));
		});
		if ((i + 1) % FLUSH_EVERY === 0) await flush();
	}
	await flush();
	const generated = (Date.now() - started) / 1000;

	// the daily sums, from the row-level tables, the way the product keeps them: appended to the
	// `_delta` tables and folded into the summaries (record.ts, rebuildDailySums → foldDeltas)
	const rebuildStarted = Date.now();
	await rebuildDailySums();
	const rebuildSeconds = (Date.now() - rebuildStarted) / 1000;
	for (const t of [
		'protocols',
		'passes',
		'discrepancies',
		'error_events',
		'audit_fields',
		'agreement_pairs',
		'audit_daily',
		'agreement_daily',
		'agreement_weekly',
		'agreement_pair_daily'
	])
		await db().query(`ANALYZE TABLE ${t}`, { type: QueryTypes.SELECT });
	return {
		protocols: opts.protocols,
		passes: passCount,
		fieldsEntered,
		discrepancies: discCount,
		errorEvents: eventCount,
		agreementPairs: pairCount,
		seconds: (Date.now() - started) / 1000,
		generateAndInsertSeconds: generated,
		insertSeconds: insertMs / 1000,
		rebuildSeconds
	};
}

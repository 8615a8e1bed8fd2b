/**
 * The Audit: attribution of resolved discrepancies to scorers (recordResolution), the summaries
 * written on submission (recordSubmission), the SQL aggregates against the same figures computed in
 * TypeScript from the raw rows, and the API route (roles, 404/400, filters, CSV).
 *
 * Everything here is dated in January–March 2001, so the date filter isolates it from the rows
 * other test files create.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import Papa from 'papaparse';
import { closeDb, exec, jsonValue, select, selectOne, transaction } from '../../src/lib/server/db';
import { foldDeltas, recordResolution, recordSubmission } from '../../src/lib/server/audit-stats/record';
import { NO_FILTERS, REPORT_NAMES, runReport, type AuditFilters } from '../../src/lib/server/audit-stats';
import { iccFromSums, sumsOf, blandAltmanFromSums } from '../../src/lib/server/audit-stats/sums';
import { blandAltman, cohenKappa, intraclassCorrelation, wilsonInterval } from '../../src/lib/scoring/agreement';
import { AACN_2020, labelFor } from '../../src/lib/scoring/labels';
import { signedIn, ACCOUNTS } from '../helpers/http';

const WINDOW: AuditFilters = { ...NO_FILTERS, from: '2001-01-01', to: '2001-03-31' };
const Q = 'from=2001-01-01&to=2001-03-31';

type Scores = Record<string, Record<string, string | null>>;
interface Disc {
	test: string;
	field: string;
	pass: 'first' | 'second' | 'both';
	kind: string;
	value: string | null;
	other: string | null;
	expected?: string | null;
}

const ids = { sam: 0, rae: 0, kit: 0, rita: 0, odd: 0, battery: 0, brief: 0, normSet: 0 };
const mine: number[] = [];
let seq = 0;

async function uid(email: string) {
	return (await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email }))!.id;
}

const count = (s: Scores) => Object.values(s).reduce((n, f) => n + Object.values(f).filter((v) => v !== null && v !== '').length, 0);

async function protocol(opts: { first: number; second: number; battery?: number; day1: string; day2: string; s1: Scores; s2: Scores; discs?: Disc[] }) {
	seq++;
	const ex = await exec(`INSERT INTO examinees (code, birth_date) VALUES (:code, '1970-05-05')`, { code: `AUD-${Date.now()}-${seq}` });
	const p = await exec(
		`INSERT INTO protocols (examinee_id, battery_id, norm_set_id, test_date, age_text, age_months, status, first_scorer_id, second_scorer_id, reviewer_id)
		 VALUES (:ex, :battery, :ns, :day, '30;11', 371, 'in_review', :first, :second, :rita)`,
		{ ex: ex.insertId, battery: opts.battery ?? ids.battery, ns: ids.normSet, day: opts.day1, first: opts.first, second: opts.second, rita: ids.rita }
	);
	const pid = p.insertId;
	mine.push(pid);
	for (const [which, scorer, s, day] of [
		['first', opts.first, opts.s1, opts.day1],
		['second', opts.second, opts.s2, opts.day2]
	] as const) {
		await exec(
			`INSERT INTO passes (protocol_id, round, which, scorer_id, status, scores, fields_entered, submitted_at)
			 VALUES (:pid, 1, :which, :scorer, 'submitted', :scores, :n, :at)`,
			{ pid, which, scorer, scores: JSON.stringify(s), n: count(s), at: `${day} 10:00:00` }
		);
	}
	const discIds: number[] = [];
	for (const [i, d] of (opts.discs ?? []).entries()) {
		const r = await exec(
			`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected)
			 VALUES (:pid, 1, :pos, :test, :field, :pass, :kind, :value, :other, :expected)`,
			{ pid, pos: i + 1, test: d.test, field: d.field, pass: d.pass, kind: d.kind, value: d.value, other: d.other, expected: d.expected ?? null }
		);
		discIds.push(r.insertId);
	}
	await transaction((t) => recordSubmission(pid, 1, t));
	return { pid, discIds };
}

async function resolve(id: number, resolution: 'first' | 'second' | 'recomputed' | 'other' | null, value: string | null) {
	await transaction(async (t) => {
		await exec(
			`UPDATE discrepancies SET resolution = :resolution, resolved_value = :value, resolved_by = IF(:resolution IS NULL, NULL, :rita), resolved_at = IF(:resolution IS NULL, NULL, NOW(3)) WHERE id = :id`,
			{ id, resolution, value, rita: ids.rita },
			t
		);
		await recordResolution(id, t);
	});
}

const eventsOf = (discrepancyId: number) =>
	select<{ scorer_id: number; kind: string; field: string; test_code: string; domain: string }>(
		'SELECT scorer_id, kind, field, test_code, domain FROM error_events WHERE discrepancy_id = :discrepancyId ORDER BY scorer_id',
		{ discrepancyId }
	);

/** Deep equality with numbers compared to 9 decimals (sums are subtracted and added back). */
function expectClose(a: unknown, b: unknown, path = ''): void {
	if (typeof a === 'number' && typeof b === 'number') return void expect(a, path).toBeCloseTo(b, 9);
	if (a && b && typeof a === 'object' && typeof b === 'object') {
		expect(Object.keys(a as object).sort(), path).toEqual(Object.keys(b as object).sort());
		for (const k of Object.keys(a as object)) expectClose((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], `${path}.${k}`);
		return;
	}
	expect(a, path).toEqual(b);
}

const SM = (raw: string, standard: string | null, t: string | null = '60', z: string | null = '1.00') => ({
	raw,
	z,
	standard,
	scaled: '13',
	t,
	percentile: '84'
});
const WR = (raw: string, standard: string | null, scaled: string | null = '13') => ({ raw, z: '1.07', standard, scaled, t: '61', percentile: '86' });

beforeAll(async () => {
	ids.sam = await uid(ACCOUNTS.scorer);
	ids.rae = await uid(ACCOUNTS.scorer2);
	ids.kit = await uid(ACCOUNTS.scorer3);
	ids.rita = await uid(ACCOUNTS.reviewer);
	const b = (await selectOne<{ id: number; norm_set_id: number }>(`SELECT id, norm_set_id FROM batteries WHERE code = 'core-adult'`))!;
	ids.battery = b.id;
	ids.normSet = b.norm_set_id;
	ids.brief = (await selectOne<{ id: number }>(`SELECT id FROM batteries WHERE code = 'brief-screen'`))!.id;
	const odd = await exec(`INSERT INTO users (email, name, roles) VALUES (:email, '=HYPERLINK("http://x.test","Odd")', 'scorer')`, {
		email: `odd.${Date.now()}@audit.test`
	});
	ids.odd = odd.insertId;
});

afterAll(async () => {
	for (const pid of mine) {
		await exec('DELETE FROM error_events WHERE protocol_id = :pid', { pid });
	}
	await closeDb();
});

describe('attribution on resolution (recordResolution)', () => {
	let disc: number[] = [];
	beforeAll(async () => {
		const r = await protocol({
			first: ids.sam,
			second: ids.rae,
			day1: '2001-01-08',
			day2: '2001-01-10',
			s1: { 'speeded-match': SM('36', '151'), 'word-recall': WR('29', '116', '15') },
			s2: { 'speeded-match': SM('63', '115'), 'word-recall': WR('29', '116', '15') },
			discs: [
				{ test: 'speeded-match', field: 'standard', pass: 'first', kind: 'transposition', value: '151', other: '115', expected: '115' },
				{ test: 'speeded-match', field: 'raw', pass: 'both', kind: 'transposition', value: '36', other: '63' },
				{ test: 'word-recall', field: 'scaled', pass: 'both', kind: 'wrong_norm_group', value: '15', other: '15', expected: '13' },
				{ test: 'speeded-match', field: 't', pass: 'first', kind: 'mismatch', value: '60', other: '60', expected: '61' }
			]
		});
		disc = r.discIds;
	});

	it('a single-pass discrepancy counts against that pass when its value was not kept', async () => {
		await resolve(disc[0], 'recomputed', '115');
		expect(await eventsOf(disc[0])).toEqual([
			{ scorer_id: ids.sam, kind: 'transposition', field: 'standard', test_code: 'speeded-match', domain: 'processing-speed' }
		]);
	});

	it('a raw mismatch (pass both) counts against the pass whose raw score was not kept, only', async () => {
		await resolve(disc[1], 'first', '36');
		expect((await eventsOf(disc[1])).map((e) => e.scorer_id)).toEqual([ids.rae]);
	});

	it('a shared error counts against both scorers', async () => {
		await resolve(disc[2], 'recomputed', '13');
		expect((await eventsOf(disc[2])).map((e) => e.scorer_id).sort()).toEqual([ids.sam, ids.rae].sort());
	});

	it('a pass whose value the reviewer kept is not counted', async () => {
		await resolve(disc[3], 'first', '60');
		expect(await eventsOf(disc[3])).toEqual([]);
	});

	it('changing a resolution recomputes the rows; calling again changes nothing; unresolving removes them', async () => {
		await resolve(disc[1], 'second', '63');
		expect((await eventsOf(disc[1])).map((e) => e.scorer_id)).toEqual([ids.sam]);
		await transaction((t) => recordResolution(disc[1], t));
		await transaction((t) => recordResolution(disc[1], t));
		expect((await eventsOf(disc[1])).map((e) => e.scorer_id)).toEqual([ids.sam]);
		await resolve(disc[1], 'other', '37');
		expect((await eventsOf(disc[1])).map((e) => e.scorer_id).sort()).toEqual([ids.sam, ids.rae].sort());
		await resolve(disc[1], null, null);
		expect(await eventsOf(disc[1])).toEqual([]);
		await resolve(disc[1], 'first', '36'); // back for the aggregates below
	});

	it('entered_at is the attributed pass’s submission time', async () => {
		const rows = await select<{ scorer_id: number; entered_at: Date }>('SELECT scorer_id, entered_at FROM error_events WHERE discrepancy_id = :d', {
			d: disc[2]
		});
		const bySc = Object.fromEntries(rows.map((r) => [r.scorer_id, new Date(r.entered_at).toISOString().slice(0, 10)]));
		expect(bySc[ids.sam]).toBe('2001-01-08');
		expect(bySc[ids.rae]).toBe('2001-01-10');
	});
});

describe('aggregates against figures computed from the raw rows', () => {
	beforeAll(async () => {
		// More protocols in the window: kit and the oddly named scorer, brief battery, two weeks.
		const spec: Array<[number, number, string, string, string, string, number]> = [
			// first, second, day1, day2, sm standard first, sm standard second, battery
			[ids.kit, ids.sam, '2001-01-15', '2001-01-16', '115', '115', ids.battery],
			[ids.rae, ids.kit, '2001-01-22', '2001-01-23', '112', '115', ids.brief],
			[ids.kit, ids.rae, '2001-02-05', '2001-02-06', '130', '115', ids.battery],
			[ids.odd, ids.kit, '2001-02-12', '2001-02-14', '115', '118', ids.battery],
			[ids.sam, ids.kit, '2001-03-01', '2001-03-02', '85', '85', ids.brief]
		];
		for (const [a, b, d1, d2, x, y, battery] of spec) {
			const r = await protocol({
				first: a,
				second: b,
				battery,
				day1: d1,
				day2: d2,
				s1: { 'speeded-match': SM('36', x), 'word-recall': WR('29', '116') },
				s2: { 'speeded-match': SM('36', y, null), 'word-recall': WR('29', x === y ? '116' : '161') },
				discs:
					x === y
						? []
						: [
								{ test: 'speeded-match', field: 'standard', pass: 'both', kind: 'mismatch', value: x, other: y, expected: '115' },
								{ test: 'word-recall', field: 'standard', pass: 'second', kind: 'transposition', value: '161', other: '116', expected: '116' }
							]
			});
			for (const id of r.discIds) {
				const d = (await selectOne<{ field: string; test_code: string }>('SELECT field, test_code FROM discrepancies WHERE id = :id', { id }))!;
				await resolve(id, 'recomputed', d.test_code === 'speeded-match' ? '115' : '116');
			}
		}
	});

	/** Errors and fields per scorer, straight from error_events and passes. */
	async function fromRows(filter: (e: { kind: string; test_code: string }) => boolean = () => true) {
		const evs = await select<{ scorer_id: number; kind: string; test_code: string; entered_at: Date }>(
			`SELECT e.scorer_id, e.kind, e.test_code, e.entered_at FROM error_events e WHERE e.protocol_id IN (:mine)`,
			{ mine }
		);
		const passes = await select<{ scorer_id: number; fields_entered: number; scores: string }>(
			`SELECT scorer_id, fields_entered, scores FROM passes WHERE protocol_id IN (:mine) AND status = 'submitted'`,
			{ mine }
		);
		const errors = new Map<number, number>();
		for (const e of evs.filter(filter)) errors.set(e.scorer_id, (errors.get(e.scorer_id) ?? 0) + 1);
		const fields = new Map<number, number>();
		for (const p of passes) fields.set(p.scorer_id, (fields.get(p.scorer_id) ?? 0) + p.fields_entered);
		return { errors, fields, evs, passes };
	}

	it('error rate per scorer: counts, denominators (sum of passes.fields_entered) and Wilson intervals', async () => {
		const { errors, fields } = await fromRows();
		const report = await runReport('scorers', WINDOW);
		for (const [scorer, n] of fields) {
			const row = report.rows.find((r) => r.scorer_id === scorer)!;
			const e = errors.get(scorer) ?? 0;
			const w = wilsonInterval(e, n)!;
			expect(row).toMatchObject({ errors: e, fields: n });
			expect(row.rate as number).toBeCloseTo((100 * e) / n, 10);
			expect(row.ci_lower as number).toBeCloseTo(w.per100.lower, 10);
			expect(row.ci_upper as number).toBeCloseTo(w.per100.upper, 10);
		}
		const all = report.rows.find((r) => r.scorer_id === null)!;
		expect(all.errors).toBe([...errors.values()].reduce((a, b) => a + b, 0));
		expect(all.fields).toBe([...fields.values()].reduce((a, b) => a + b, 0));
		expect(all.passes).toBe(mine.length * 2);
	});

	it('kind and test filters: errors of that kind / on that test; test denominators are that test’s fields', async () => {
		const k = await runReport('kinds', { ...WINDOW, kind: 'transposition' });
		const { errors, fields, passes } = await fromRows((e) => e.kind === 'transposition');
		for (const [scorer, n] of fields) {
			const row = k.rows.find((r) => r.scorer_id === scorer && r.kind === 'transposition')!;
			expect(row).toMatchObject({ errors: errors.get(scorer) ?? 0, fields: n });
		}
		const t = await runReport('tests', WINDOW);
		const onTest = new Map<number, number>();
		for (const p of passes) {
			const s = jsonValue<Scores>(p.scores);
			const n = Object.values(s['word-recall'] ?? {}).filter((v) => v !== null && v !== '').length;
			onTest.set(p.scorer_id, (onTest.get(p.scorer_id) ?? 0) + n);
		}
		const { errors: wrErrors } = await fromRows((e) => e.test_code === 'word-recall');
		for (const [scorer, n] of onTest) {
			const row = t.rows.find((r) => r.scorer_id === scorer && r.group === 'word-recall')!;
			expect(row).toMatchObject({ errors: wrErrors.get(scorer) ?? 0, fields: n, group_name: 'Harbour Word Recall' });
		}
		const filtered = await runReport('scorers', { ...WINDOW, test: 'word-recall' });
		for (const [scorer, n] of onTest) expect(filtered.rows.find((r) => r.scorer_id === scorer)).toMatchObject({ fields: n, errors: wrErrors.get(scorer) ?? 0 });
	});

	it('scorer, battery and date filters narrow errors and denominators alike', async () => {
		const kit = await runReport('scorers', { ...WINDOW, scorer: ids.kit });
		expect(kit.rows.filter((r) => r.scorer_id !== null).map((r) => r.scorer_id)).toEqual([ids.kit]);
		const { errors, fields } = await fromRows();
		expect(kit.rows[0]).toMatchObject({ errors: errors.get(ids.kit) ?? 0, fields: fields.get(ids.kit) });

		const brief = await runReport('scorers', { ...WINDOW, battery: ids.brief });
		const briefPasses = await select<{ n: number }>(
			`SELECT COALESCE(SUM(p.fields_entered), 0) AS n FROM passes p JOIN protocols pr ON pr.id = p.protocol_id WHERE pr.id IN (:mine) AND pr.battery_id = :b`,
			{ mine, b: ids.brief }
		);
		expect(brief.rows.find((r) => r.scorer_id === null)!.fields).toBe(Number(briefPasses[0].n));

		const january = await runReport('scorers', { ...WINDOW, to: '2001-01-31' });
		const jan = await select<{ n: number }>(
			`SELECT COALESCE(SUM(fields_entered), 0) AS n FROM passes WHERE protocol_id IN (:mine) AND submitted_at < '2001-02-01'`,
			{ mine }
		);
		expect(january.rows.find((r) => r.scorer_id === null)!.fields).toBe(Number(jan[0].n));
		const none = await runReport('scorers', { ...NO_FILTERS, from: '2000-01-01', to: '2000-12-31' });
		expect(none.rows.find((r) => r.scorer_id === null)).toMatchObject({ errors: 0, fields: 0, rate: null });
	});

	it('weeks: ISO weeks by submission day, errors and fields per scorer-week', async () => {
		const w = await runReport('weeks', WINDOW);
		const { evs, passes } = await fromRows();
		void passes;
		const monday = (d: Date) => {
			const x = new Date(Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), d.getUTCDate()));
			x.setUTCDate(x.getUTCDate() - ((x.getUTCDay() + 6) % 7));
			return x.toISOString().slice(0, 10);
		};
		const byWeek = new Map<string, number>();
		for (const e of evs)
			byWeek.set(`${e.scorer_id}|${monday(new Date(e.entered_at))}`, (byWeek.get(`${e.scorer_id}|${monday(new Date(e.entered_at))}`) ?? 0) + 1);
		for (const [k, n] of byWeek) {
			const [s, wk] = k.split('|');
			expect(w.rows.find((r) => r.scorer_id === Number(s) && r.week_start === wk)).toMatchObject({ errors: n });
		}
		expect(w.rows.find((r) => r.week_start === '2001-01-08' && r.scorer_id === null)!.week).toBe('2001-W02');
	});

	it('agreement: exact %, kappa on AACN labels, six ICCs and Bland–Altman equal the library on the raw pairs', async () => {
		const passes = await select<{ protocol_id: number; which: string; scores: string; submitted_at: Date }>(
			`SELECT protocol_id, which, scores, submitted_at FROM passes WHERE protocol_id IN (:mine)`,
			{ mine }
		);
		const roundDay = (pid: number) =>
			new Date(Math.max(...passes.filter((p) => p.protocol_id === pid).map((p) => new Date(p.submitted_at).getTime()))).toISOString().slice(0, 10);
		// whole weeks come from the weekly sums and edge days from the daily ones: a range on a week boundary and one mid-week
		for (const [range, field] of [
			[WINDOW, 'standard'],
			[WINDOW, 'raw'],
			[{ ...WINDOW, from: '2001-01-10', to: '2001-02-13' }, 'standard']
		] as const) {
			const pairs: Array<[number, number]> = [];
			for (const pid of mine.filter((p) => roundDay(p) >= range.from! && roundDay(p) <= range.to!)) {
				const [a, b] = ['first', 'second'].map((w) => jsonValue<Scores>(passes.find((p) => p.protocol_id === pid && p.which === w)!.scores));
				for (const test of Object.keys(a)) {
					const x = a[test]?.[field];
					const y = b[test]?.[field];
					if (x && y) pairs.push([Number(x), Number(y)]);
				}
			}
			const report = await runReport('agreement', range);
			const row = report.rows.find((r) => r.field === field)!;
			expect(row.n).toBe(pairs.length);
			expect(row.exact_percent as number).toBeCloseTo((100 * pairs.filter(([x, y]) => x === y).length) / pairs.length, 10);
			const icc = intraclassCorrelation(pairs);
			for (const form of Object.keys(icc.icc) as Array<keyof typeof icc.icc>) expect(row[form] as number).toBeCloseTo(icc.icc[form]!, 9);
			const ba = blandAltman(pairs);
			expect(row.bias as number).toBeCloseTo(ba.bias, 10);
			expect(row.loa_lower as number).toBeCloseTo(ba.lower, 9);
			expect(row.loa_upper as number).toBeCloseTo(ba.upper, 9);
			if (field === 'standard') {
				const labels = pairs.map(([x, y]) => [labelFor('standard', x).id, labelFor('standard', y).id] as [string, string]);
				const cats = AACN_2020.bands.standard.map((b) => b.id);
				expect(row.kappa as number).toBeCloseTo(cohenKappa(labels, { categories: cats }).kappa!, 10);
				expect(row.kappa_quadratic as number).toBeCloseTo(cohenKappa(labels, { categories: cats, weights: 'quadratic' }).kappa!, 10);
				const pts = await runReport('bland-altman', range);
				expect(pts.meta).toMatchObject({ n: pairs.length });
				expect(pts.meta!.bias as number).toBeCloseTo(ba.bias, 10);
				expect(pts.rows.reduce((s, p) => s + (p.count as number), 0)).toBe(pairs.length);
			}
		}
	});

	it('recording a round twice leaves the daily sums unchanged', async () => {
		const before = await runReport('agreement', WINDOW);
		const beforeScorers = await runReport('scorers', WINDOW);
		await transaction((t) => recordSubmission(mine[1], 1, t));
		await transaction((t) => recordSubmission(mine[1], 1, t));
		expectClose((await runReport('agreement', WINDOW)).rows, before.rows);
		expectClose((await runReport('scorers', WINDOW)).rows, beforeScorers.rows);
	});

	it('a submit appends to the delta tables and locks no summary row; folding the deltas changes no report (issue 18)', async () => {
		// every summary row of the window exists (the worker folds too, at any moment: fold here first)
		await foldDeltas();
		const DAYS = "BETWEEN '2001-01-01' AND '2001-03-31'";
		const before = await Promise.all(REPORT_NAMES.map((r) => runReport(r, WINDOW)));
		await transaction(async (t) => {
			await recordSubmission(mine[1], 1, t);
			// the round's sums were appended (its old sums negated, its new ones added) …
			const mineInDelta = await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM audit_daily_delta WHERE day ${DAYS}`, {}, t);
			expect(Number(mineInDelta!.n)).toBeGreaterThan(0);
			// … and another connection can still lock every summary row of those days at once: the submit
			// holds none of them (before, its upsert held them until it committed)
			for (const [table, col] of [
				['audit_daily', 'day'],
				['agreement_daily', 'day'],
				['agreement_weekly', 'week'],
				['agreement_pair_daily', 'day']
			])
				await expect(select(`SELECT * FROM ${table} WHERE ${col} ${DAYS} FOR UPDATE NOWAIT`), table).resolves.not.toHaveLength(0);
		});
		const unfolded = await Promise.all(REPORT_NAMES.map((r) => runReport(r, WINDOW)));
		expectClose(
			unfolded.map((r) => r.rows),
			before.map((r) => r.rows)
		);
		await foldDeltas();
		for (const table of ['audit_daily_delta', 'agreement_daily_delta', 'agreement_pair_daily_delta'])
			expect(Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM ${table} WHERE day ${DAYS}`))!.n), table).toBe(0);
		const folded = await Promise.all(REPORT_NAMES.map((r) => runReport(r, WINDOW)));
		expectClose(
			folded.map((r) => r.rows),
			before.map((r) => r.rows)
		);
	});

	it('ICC and Bland–Altman from sums equal the matrix forms on random data (sums.ts)', () => {
		let seed = 7;
		const r = () => (seed = (seed * 16807) % 2147483647) / 2147483647;
		for (let trial = 0; trial < 25; trial++) {
			const n = 2 + Math.floor(r() * 60);
			const pairs = Array.from({ length: n }, () => {
				const t = 100 + 15 * (r() - 0.5) * 4;
				return [Math.round(t + (r() < 0.2 ? (r() - 0.5) * 10 : 0)), Math.round(t)] as [number, number];
			});
			const m = intraclassCorrelation(pairs);
			const s = iccFromSums(sumsOf(pairs))!;
			for (const f of Object.keys(m.icc) as Array<keyof typeof m.icc>) {
				if (m.icc[f] === null) expect(s.icc[f]).toBeNull();
				else expect(s.icc[f]!).toBeCloseTo(m.icc[f]!, 9);
			}
			const ba = blandAltman(pairs);
			const bs = blandAltmanFromSums(sumsOf(pairs))!;
			expect(bs.bias).toBeCloseTo(ba.bias, 10);
			expect(bs.sd).toBeCloseTo(ba.sd, 9);
		}
	});
});

describe('GET /api/v1/audit/[report]', () => {
	it('answers the lead with JSON for every report', async () => {
		const c = await signedIn('lead');
		for (const report of ['scorers', 'kinds', 'tests', 'domains', 'fields', 'weeks', 'agreement', 'agreement-scorers', 'bland-altman']) {
			const res = await c.get(`/api/v1/audit/${report}?${Q}`);
			expect(res.status, report).toBe(200);
			const body = await res.json();
			expect(body.report).toBe(report);
			expect(Array.isArray(body.rows)).toBe(true);
			expect(body.columns.length).toBeGreaterThan(0);
		}
	});

	it('refuses scorers (403) and anonymous callers (401)', async () => {
		const c = await signedIn('scorer');
		expect((await c.get(`/api/v1/audit/scorers?${Q}`)).status).toBe(403);
		const page = await c.get('/audit');
		expect(page.status).toBe(403);
		const anon = await fetch(new URL(`/api/v1/audit/scorers`, (await signedIn('lead')).base));
		expect(anon.status).toBe(401);
	});

	it('unknown report: 404 JSON naming the reports', async () => {
		const c = await signedIn('lead');
		const res = await c.get('/api/v1/audit/nonsense');
		expect(res.status).toBe(404);
		expect(res.headers.get('content-type')).toContain('application/json');
		expect((await res.json()).reports).toContain('scorers');
	});

	it('bad filters: 400 with a message per field', async () => {
		const c = await signedIn('lead');
		const res = await c.get('/api/v1/audit/scorers?from=2001-02-30&to=yesterday&scorer=-3&kind=typo&test=DROP%20TABLE&format=xml&colour=red');
		expect(res.status).toBe(400);
		const body = await res.json();
		expect(Object.keys(body.errors).sort()).toEqual(['colour', 'format', 'from', 'kind', 'scorer', 'test', 'to']);
		const order = await c.get('/api/v1/audit/scorers?from=2001-03-01&to=2001-02-01');
		expect((await order.json()).errors.to).toMatch(/before the start/);
	});

	it('filters apply over HTTP the same as in process', async () => {
		const c = await signedIn('lead');
		const body = await (await c.get(`/api/v1/audit/scorers?${Q}&scorer=${ids.kit}&kind=mismatch`)).json();
		const direct = await runReport('scorers', { ...WINDOW, scorer: ids.kit, kind: 'mismatch' });
		expect(body.rows).toEqual(JSON.parse(JSON.stringify(direct.rows)));
	});

	it('CSV export: one file per table, header of labels, formula-looking text neutralised, numbers left alone', async () => {
		const c = await signedIn('lead');
		const res = await c.get(`/api/v1/audit/scorers?${Q}&format=csv`);
		expect(res.status).toBe(200);
		expect(res.headers.get('content-type')).toContain('text/csv');
		expect(res.headers.get('content-disposition')).toMatch(/attachment; filename="crosstally-audit-scorers-\d{4}-\d{2}-\d{2}\.csv"/);
		const text = (await res.text()).replace(/^\ufeff/, '');
		const parsed = Papa.parse<string[]>(text.trim());
		expect(parsed.data[0]).toEqual([
			'Scorer',
			'Protocols scored',
			'Errors',
			'Fields entered',
			'Errors per 100 fields',
			'95% CI lower (Wilson)',
			'95% CI upper (Wilson)',
			'Errors per protocol'
		]);
		const odd = parsed.data.find((r) => r[0].includes('HYPERLINK'))!;
		expect(odd[0]).toBe(`'=HYPERLINK("http://x.test","Odd")`);
		expect(parsed.data.some((r) => r[0] === 'All scorers')).toBe(true);

		const ba = (await (await c.get(`/api/v1/audit/bland-altman?${Q}&format=csv`)).text()).replace(/^\ufeff/, '');
		const rows = Papa.parse<string[]>(ba.trim()).data;
		expect(rows[0]).toEqual(['Mean of the two entries', 'Difference, first − second', 'Pairs']);
		const negative = rows.find((r) => r[1].startsWith('-'));
		expect(negative, 'a negative difference exported as a plain number').toBeDefined();
		for (const report of ['kinds', 'tests', 'domains', 'fields', 'weeks', 'agreement', 'agreement-scorers']) {
			const r = await c.get(`/api/v1/audit/${report}?${Q}&format=csv`);
			expect(r.status, report).toBe(200);
			expect((await r.text()).split('\r\n').length, report).toBeGreaterThan(1);
		}
	});

	it('the Audit page renders for the lead', async () => {
		const c = await signedIn('lead');
		const res = await c.get('/audit');
		expect(res.status).toBe(200);
		const html = await res.text();
		expect(html).toContain('Audit');
		expect(html).toContain('Landis');
	});

	it('the Audit page is drawn on the server from the filters in its address; bad values are named, never a 500', async () => {
		const c = await signedIn('lead');
		// the window's figures, counted here from the raw rows (everything in the window is this file's)
		const raw = (await selectOne<{ passes: number; fields: number }>(
			`SELECT COUNT(*) AS passes, SUM(fields_entered) AS fields FROM passes WHERE protocol_id IN (:mine) AND status = 'submitted'`,
			{ mine }
		))!;
		const errorCount = (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM error_events WHERE protocol_id IN (:mine)', { mine }))!.n;
		const res = await c.get(`/audit?${Q}&scorer=${ids.sam}&kind=transposition&field=scaled`);
		expect(res.status).toBe(200);
		const html = await res.text();
		// the tables are in the first answer (no request from the browser needed), and the form shows the address
		expect(html).toContain('data-testid="table-scorers"');
		expect(html).toMatch(/id="f-from"[^>]*value="2001-01-01"/);
		expect(html).toMatch(new RegExp(`<option value="${ids.sam}"[^>]*selected`));
		expect(html).toMatch(/<option value="transposition"[^>]*selected/);
		expect(html).toMatch(/<option value="scaled"[^>]*selected/);
		expect(html).toContain(`/api/v1/audit/scorers?from=2001-01-01&amp;to=2001-03-31&amp;scorer=${ids.sam}&amp;kind=transposition&amp;format=csv`);
		const all = await (await c.get(`/audit?${Q}`)).text();
		expect(all).toContain(
			`${Number(raw.passes).toLocaleString('en-GB')} protocol passes · ${Number(raw.fields).toLocaleString('en-GB')} fields entered · ${Number(errorCount).toLocaleString('en-GB')} errors`
		);

		for (const [q, key, message] of [
			['from=2023-02-30', 'From', /2023-02-30 does not exist/],
			['kind=nonsense', 'Kind of error', /Use one of the kinds/],
			['scorer=abc', 'Scorer', /Choose a scorer from the list/],
			['from=2001-03-01&to=2001-01-01', 'To', /The end date is before the start date/],
			['colour=red', 'colour', /Unknown filter/]
		] as const) {
			const bad = await c.get(`/audit?${q}`);
			expect(bad.status, q).toBe(200);
			const text = await bad.text();
			expect(text, q).toContain('Some filters in the address are not valid');
			expect(text, q).toContain(`<strong>${key}</strong>`);
			expect(text, q).toMatch(message);
			expect(text, q).not.toContain('data-testid="table-scorers"');
		}
	});
});

describe('whole-range summaries: reports with no date filter (agreement_total, agreement_pair_total, agreement_values; issue 18)', () => {
	// a scorer of this block only: the scorer filter isolates its pairs from every other file's rows
	let solo = 0;
	const ALL: AuditFilters = { ...NO_FILTERS };
	beforeAll(async () => {
		solo = (await exec(`INSERT INTO users (email, name, roles) VALUES (:email, 'Solo Whole-Range', 'scorer')`, { email: `solo.${Date.now()}@audit.test` }))
			.insertId;
		const sm = (raw: string | null, standard: string) => ({ 'speeded-match': { raw, standard } });
		for (const [x, y, day] of [
			[sm('30', '100'), sm('30', '100'), '2001-05-07'],
			[sm('32', '110'), sm('30', '100'), '2001-06-11'],
			[sm('25', '85'), sm(null, '90'), '2001-07-16']
		] as const)
			await protocol({ first: solo, second: ids.sam, day1: day, day2: day, s1: x as Scores, s2: y as Scores });
	});
	const soloOnly = (): AuditFilters => ({ ...ALL, scorer: solo });

	it('the totals and the pre-binned values hold the fixture’s pairs (by hand)', async () => {
		const values = await select<{ scorer_id: number; x: number; y: number; n: number }>(
			`SELECT scorer_id, first_value AS x, second_value AS y, SUM(pairs) AS n FROM (
			   SELECT scorer_id, first_value, second_value, pairs FROM agreement_values WHERE scorer_id = :solo AND field = 'standard'
			   UNION ALL SELECT scorer_id, first_value, second_value, pairs FROM agreement_values_delta WHERE scorer_id = :solo AND field = 'standard') u
			  GROUP BY scorer_id, x, y HAVING n <> 0 ORDER BY x, y`,
			{ solo }
		);
		expect(values.map((v) => [Number(v.x), Number(v.y), Number(v.n)])).toEqual([
			[85, 90, 1],
			[100, 100, 1],
			[110, 100, 1]
		]);
		await foldDeltas();
		const total = await select<{ field: string; lx: string; ly: string; pairs: number; one_sided: number; exact: number; sd: number }>(
			`SELECT field, first_label AS lx, second_label AS ly, pairs, one_sided, exact, sd FROM agreement_total
			  WHERE scorer_id = :solo AND (pairs <> 0 OR one_sided <> 0) ORDER BY field, lx, ly`,
			{ solo }
		);
		expect(total.map((r) => [r.field, r.lx, r.ly, Number(r.pairs), Number(r.one_sided), Number(r.exact), Number(r.sd)])).toEqual([
			// raw: (30, 30), (32, 30) and 25 entered by the first pass only; no labels on raw scores
			['raw', '', '', 2, 1, 1, 2],
			['standard', 'average', 'average', 1, 0, 1, 0],
			['standard', 'high_average', 'average', 1, 0, 0, 10],
			['standard', 'low_average', 'average', 1, 0, 0, -5]
		]);
		const pairTotal = await selectOne<{ pairs: number; sd: number }>(
			`SELECT SUM(pairs) AS pairs, SUM(sd) AS sd FROM agreement_pair_total WHERE field = 'standard' AND first_scorer_id = :solo AND second_scorer_id = :sam`,
			{ solo, sam: ids.sam }
		);
		expect([Number(pairTotal!.pairs), Number(pairTotal!.sd)]).toEqual([3, 5]);
	});

	it('agreement, scorer pairs and Bland–Altman for the whole range: figures worked by hand', async () => {
		const agreement = await runReport('agreement', soloOnly());
		const standard = agreement.rows.find((r) => r.field === 'standard')!;
		const raw = agreement.rows.find((r) => r.field === 'raw')!;
		// standard: (100, 100), (110, 100), (85, 90): d = 0, 10, −5; bias 5/3; sd = √((25 + 625 + 400)/9 / 2) = √(1050/18)
		expect(standard).toMatchObject({ n: 3, one_sided: 0, exact_agreements: 1 });
		expect(standard.exact_percent as number).toBeCloseTo(100 / 3, 10);
		// labels: (average, average), (high average, average), (low average, average): pₒ = 1/3, pₑ = (1·3)/9 = 1/3, κ = 0
		expect(standard.label_agreement_percent as number).toBeCloseTo(100 / 3, 10);
		expect(standard.kappa as number).toBeCloseTo(0, 12);
		expect(standard.bias as number).toBeCloseTo(5 / 3, 12);
		expect(standard.loa_upper as number).toBeCloseTo(5 / 3 + 1.96 * Math.sqrt(1050 / 18), 10);
		// raw: (30, 30), (32, 30): n 2, one entered by the first pass only, one exact; bias 1
		expect(raw).toMatchObject({ n: 2, one_sided: 1, exact_agreements: 1, exact_percent: 50, bias: 1 });

		const pairs = await runReport('agreement-scorers', soloOnly());
		expect(pairs.rows).toHaveLength(1);
		expect(pairs.rows[0]).toMatchObject({ first_scorer_id: solo, second_scorer_id: ids.sam, n: 3, exact_agreements: 1 });
		expect(pairs.rows[0].bias as number).toBeCloseTo(5 / 3, 12);

		const ba = await runReport('bland-altman', soloOnly());
		expect(ba.meta).toMatchObject({ n: 3 });
		expect(ba.meta!.bias as number).toBeCloseTo(5 / 3, 12);
		expect(ba.meta!.sd as number).toBeCloseTo(Math.sqrt(1050 / 18), 12);
		expect(ba.rows).toEqual([
			{ mean: 87.5, difference: -5, count: 1 },
			{ mean: 100, difference: 0, count: 1 },
			{ mean: 105, difference: 10, count: 1 }
		]);
	});

	it('the whole-range reports equal the dated ones over a range holding every pair, before and after a fold and a second recording', async () => {
		const dated: AuditFilters = { ...soloOnly(), from: '2001-05-01', to: '2001-07-31' };
		const reports = ['agreement', 'agreement-scorers', 'bland-altman'] as const;
		const want = await Promise.all(reports.map((r) => runReport(r, dated)));
		const check = async () => {
			const got = await Promise.all(reports.map((r) => runReport(r, soloOnly())));
			expectClose(
				got.map((r) => [r.rows, r.meta]),
				want.map((r) => [r.rows, r.meta])
			);
		};
		await check();
		// recorded again: the old sums negated and the new ones appended to the delta tables, not yet folded
		const last = mine[mine.length - 1];
		await transaction((t) => recordSubmission(last, 1, t));
		const unfolded = await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM agreement_values_delta WHERE scorer_id = :solo', { solo });
		expect(Number(unfolded!.n)).toBeGreaterThan(0);
		await check();
		await foldDeltas();
		expect(Number((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM agreement_values_delta WHERE scorer_id = :solo', { solo }))!.n)).toBe(0);
		await check();
	});
});

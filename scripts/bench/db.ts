/**
 * `npm run bench:db` — every list and audit query at the benchmark's data size uses an index.
 * Runs the service functions the list screens and APIs call (protocol list with its filters and
 * pages, both worklists, review list, protocol history, mail log, outbox, people, catalog lists,
 * every audit report unfiltered and by scorer), captures each SELECT they send, and EXPLAINs it:
 * table, access type, key, rows examined. A full scan (type ALL, no key) of a table with more than
 * --small rows (default 1000) is flagged; scans of small look-up tables are listed as such.
 * Run after bench:http / bench:audit have filled the database (npm run bench does). Options: --out.
 *
 * The audit's `_delta` tables are folded first (foldDeltas, as the worker does every MAIL_SWEEP_MS,
 * 30 s): a report reads its totals plus every delta row not yet folded, so a delta table is read whole
 * by design, and how many rows it holds at a given moment says how long ago the worker last folded
 * (bench:http's submits just before leave thousands), not whether a query lacks an index. The number
 * of rows folded is printed.
 */
import { performance } from 'node:perf_hooks';
import { arg, emit, loadBenchEnv, machine, median } from './lib';

loadBenchEnv('db');
const { db, select, selectOne, closeDb } = await import('../../src/lib/server/db');
const { closeRedis } = await import('../../src/lib/server/redis'); // fixtures' writes wake the mail dispatcher (mail/wake.ts)
const S = await import('../../src/lib/server/protocols/service');
const R = await import('../../src/lib/server/protocols/decisions');
const { listUsers } = await import('../../src/lib/server/users');
const { listTests, listBatteries, listNormGroups } = await import('../../src/lib/server/catalog');
const { listProtocolMail } = await import('../../src/lib/server/mail/reminders/history');
const { pendingOutbox } = await import('../../src/lib/server/mail/outbox');
const { NO_FILTERS, REPORT_NAMES, runReport } = await import('../../src/lib/server/audit-stats');
const { foldDeltas } = await import('../../src/lib/server/audit-stats/record');
const F = await import('./fixtures');

const SMALL = Number(arg('small', '1000'));

interface Captured {
	label: string;
	sql: string;
	replacements: unknown;
}

async function main() {
	console.error(`[bench:db] folded ${await foldDeltas()} audit delta rows into their summaries (as the worker does) before the EXPLAINs`);
	const seq = db();
	const original = seq.query.bind(seq);
	const captured: Captured[] = [];
	let label = '';
	(seq as unknown as { query: unknown }).query = (sql: string, options: { replacements?: unknown }) => {
		if (typeof sql === 'string' && /^\s*SELECT/i.test(sql)) captured.push({ label, sql, replacements: options?.replacements });
		return original(sql, options as never);
	};
	const lead = await F.actor(F.EMAILS.lead);
	const scorer = await F.actor(F.EMAILS.second);
	const first = await F.actor(F.EMAILS.first);
	const reviewer = await F.actor(F.EMAILS.reviewer);
	const inReview = await selectOne<{ id: number }>(`SELECT id FROM protocols WHERE status = 'in_review' AND reviewer_id = :r ORDER BY id DESC LIMIT 1`, {
		r: reviewer.id
	});
	const normSet = await selectOne<{ id: number }>('SELECT id FROM norm_sets ORDER BY id LIMIT 1');
	const scorerId =
		(await selectOne<{ id: number }>('SELECT scorer_id AS id FROM error_events GROUP BY scorer_id ORDER BY COUNT(*) DESC LIMIT 1'))?.id ?? first.id;
	captured.length = 0;

	const calls: Array<[string, () => Promise<unknown>]> = [
		['protocol list (lead)', () => S.listProtocols(lead, {})],
		['protocol list (lead, page 20)', () => S.listProtocols(lead, { page: 20 })],
		['protocol list (lead, in review)', () => S.listProtocols(lead, { status: 'in_review' })],
		['protocol list (lead, code search)', () => S.listProtocols(lead, { q: 'BH-R' })],
		['protocol list (scorer)', () => S.listProtocols(scorer, {})],
		['protocol list (reviewer)', () => S.listProtocols(reviewer, {})],
		['worklist (scorer)', () => S.worklist(scorer)],
		['worklist (first scorer)', () => S.worklist(first)],
		['worklist (reviewer)', () => S.worklist(reviewer)],
		...(inReview
			? ([
					['review list', () => R.reviewView(inReview.id, reviewer)],
					['protocol history', () => S.protocolHistoryFor(inReview.id, reviewer)],
					['protocol mail log', () => listProtocolMail(inReview.id)]
				] as Array<[string, () => Promise<unknown>]>)
			: []),
		['outbox (dispatcher)', () => pendingOutbox()],
		['people', () => listUsers()],
		['catalog tests', () => listTests({})],
		['catalog batteries', () => listBatteries()],
		...(normSet ? ([['norm groups', () => listNormGroups(normSet.id)]] as Array<[string, () => Promise<unknown>]>) : []),
		...REPORT_NAMES.flatMap(
			(r) =>
				[
					[`audit ${r}`, () => runReport(r, NO_FILTERS)],
					[`audit ${r} (scorer)`, () => runReport(r, { ...NO_FILTERS, scorer: scorerId })]
				] as Array<[string, () => Promise<unknown>]>
		)
	];
	for (const [l, fn] of calls) {
		label = l;
		await fn();
	}
	(seq as unknown as { query: unknown }).query = original;

	const counts = await selectOne<Record<string, number>>(
		`SELECT (SELECT COUNT(*) FROM protocols) AS protocols, (SELECT COUNT(*) FROM passes) AS passes, (SELECT COUNT(*) FROM discrepancies) AS discrepancies,
		        (SELECT COUNT(*) FROM audit_events) AS audit_events, (SELECT COUNT(*) FROM error_events) AS error_events, (SELECT COUNT(*) FROM agreement_pairs) AS agreement_pairs`
	);
	const seen = new Set<string>();
	const queries: Array<{
		label: string;
		sql: string;
		plan: Array<{ table: string; type: string; possible_keys: string | null; key: string | null; rows: number; extra: string }>;
		full_scans: string[];
		/** Full scans of a table that had candidate indexes (EXPLAIN possible_keys), which the optimizer did not take. */
		chosen_scans: string[];
		small_scans: string[];
	}> = [];
	for (const c of captured) {
		const norm = c.sql.replace(/\s+/g, ' ').trim();
		if (seen.has(norm)) continue;
		seen.add(norm);
		const plan = (await select<Record<string, unknown>>(`EXPLAIN ${c.sql}`, c.replacements as never)).map((p) => ({
			table: String(p.table),
			type: String(p.type),
			possible_keys: (p.possible_keys as string | null) ?? null,
			key: (p.key as string | null) ?? null,
			rows: Number(p.rows ?? 0),
			extra: String(p.Extra ?? '')
		}));
		const scans = plan.filter((p) => p.type === 'ALL' && p.key === null && !/^<(derived|subquery|union)/.test(p.table));
		queries.push({
			label: c.label,
			sql: norm.slice(0, 160),
			plan,
			full_scans: scans.filter((p) => p.rows > SMALL).map((p) => `${p.table} (${p.rows} rows)`),
			chosen_scans: scans.filter((p) => p.rows > SMALL && p.possible_keys).map((p) => `${p.table}: ${p.possible_keys}`),
			small_scans: scans.filter((p) => p.rows <= SMALL).map((p) => `${p.table} (${p.rows} rows)`)
		});
	}

	console.log(`\nEXPLAIN of ${queries.length} distinct list and audit queries over ${JSON.stringify(counts)}\n`);
	for (const q of queries) {
		const flag = q.full_scans.length ? 'FULL SCAN ' : 'ok        ';
		console.log(`${flag}${q.label}: ${q.sql.slice(0, 110)}…`);
		for (const p of q.plan)
			console.log(
				`            ${p.table.padEnd(14)} ${p.type.padEnd(7)} ${String(p.key ?? '— no index —').padEnd(34)} rows≈${String(p.rows).padEnd(8)} ${p.extra}`
			);
	}
	const bad = queries.filter((q) => q.full_scans.length);
	// each scan is counted; beside it, the indexes the optimizer had (possible_keys) and how much of
	// protocols the benchmark's reviewer and scorer own, so a scan that is the right plan for this data
	// (a filter matching half the table) can be told from a missing index, without being hidden
	const chosen = bad.filter((q) => q.chosen_scans.length === q.full_scans.length);
	const share = await selectOne<{ n: number; reviewer: number; scorer: number }>(
		`SELECT COUNT(*) AS n, SUM(reviewer_id = :r) AS reviewer, SUM(first_scorer_id = :s OR second_scorer_id = :s) AS scorer FROM protocols`,
		{ r: reviewer.id, s: scorer.id }
	);
	const pct = (x: number | undefined) => `${((100 * Number(x ?? 0)) / Math.max(1, Number(share?.n ?? 0))).toFixed(0)} %`;
	console.log(
		bad.length
			? `\n${bad.length} of ${queries.length} queries scan a large table (${chosen.length} of them had a candidate index, not taken). The benchmark's reviewer owns ${pct(share?.reviewer)} of the protocols, its scorer ${pct(share?.scorer)}:`
			: `\nEvery one of ${queries.length} queries reads large tables through an index.`
	);
	for (const q of bad) console.log(`  ${q.label}: ${q.full_scans.join('; ')}${q.chosen_scans.length ? ` — candidates: ${q.chosen_scans.join('; ')}` : ''}`);
	const roundTrip = await roundTrips();
	console.error(
		`[bench:db] one primary-key SELECT, ${roundTrip.queries} × 3 rounds each: loopback TCP ${roundTrip.tcp_ms} ms (client CPU ${roundTrip.tcp_cpu_ms} ms), Unix socket ${roundTrip.socket_ms ?? '—'} ms (${roundTrip.socket_cpu_ms ?? '—'} ms)`
	);
	emit('db', {
		...machine(),
		round_trip: roundTrip,
		data: counts,
		small_table_rows: SMALL,
		queries: queries.length,
		full_scans: bad.length,
		optimizer_chosen_scans: chosen.length,
		ok: bad.length === 0,
		flagged: bad.map((q) => ({ label: q.label, sql: q.sql, scans: q.full_scans, optimizer_chosen: q.chosen_scans })),
		plans: queries
	});
}

/**
 * What a round trip to MariaDB costs the app over loopback TCP and over the server's Unix socket (the
 * scripts' stack uses the socket: config.db.socket). The same primary-key SELECT on two plain
 * connections, rounds interleaved; median per query of the three rounds, wall time and client CPU.
 */
async function roundTrips() {
	const mariadb = await import('mariadb');
	const { config } = await import('../../src/lib/server/config');
	const base = { user: config.db.user, password: config.db.password, database: config.db.name };
	const N = 2000;
	const time = async (c: import('mariadb').Connection) => {
		const t0 = performance.now();
		const cpu0 = process.cpuUsage();
		for (let i = 0; i < N; i++) await c.query('SELECT id, email FROM users WHERE id = ?', [1 + (i % 5)]);
		const cpu = process.cpuUsage(cpu0);
		return { ms: (performance.now() - t0) / N, cpu: (cpu.user + cpu.system) / 1000 / N };
	};
	const tcp = await mariadb.createConnection({ ...base, host: config.db.host, port: config.db.port });
	const sock = config.db.socket ? await mariadb.createConnection({ ...base, socketPath: config.db.socket }) : null;
	const t: { ms: number; cpu: number }[] = [];
	const u: { ms: number; cpu: number }[] = [];
	try {
		for (let r = 0; r < 3; r++) {
			t.push(await time(tcp));
			if (sock) u.push(await time(sock));
		}
	} finally {
		await tcp.end();
		await sock?.end();
	}
	const med = (xs: number[]) => (xs.length ? Math.round(median(xs) * 1000) / 1000 : null);
	return {
		queries: N,
		tcp_ms: med(t.map((x) => x.ms)),
		tcp_cpu_ms: med(t.map((x) => x.cpu)),
		socket_ms: med(u.map((x) => x.ms)),
		socket_cpu_ms: med(u.map((x) => x.cpu))
	};
}

main()
	.catch((e) => {
		console.error(`[bench:db] ${e instanceof Error ? e.stack : e}`);
		process.exitCode = 1;
	})
	.finally(() => Promise.all([closeDb(), closeRedis()]));

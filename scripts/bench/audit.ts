/**
 * `npm run bench:audit` — the Audit reports at clinic scale.
 *
 * Seeds about 5,000,000 entered fields (85,000 protocols of the demo catalog, two passes each,
 * six scorers over 26 weeks; scripts/bench/audit-seed.ts) unless the database already holds them,
 * then times every audit report in process (the service functions the API route calls), unfiltered
 * and with typical filters, median of --runs runs after one warm-up. With --url (an app running on
 * the same database) it also times the HTTP routes as the lead. Goal: < 300 ms each. Prints a
 * table, EXPLAIN of every query the reports run (key used, rows examined), one `BENCH_JSON {…}`
 * line, and writes .bench/audit.json.
 *
 * Run against services of your own (never the demo or test ports of others):
 *   export CROSSTALLY_MODE=test CROSSTALLY_DATA_DIR=$PWD/.data/bench DB_PORT=3352 REDIS_PORT=6452 \
 *          SMTP_PORT=2653 MAILFAKE_PORT=2654 PORT=3052 DB_NAME=crosstally_bench
 *   bash scripts/services.sh up && set -a && . $CROSSTALLY_DATA_DIR/crosstally.env && set +a
 *   npm run bench:audit                      # seeds accounts + catalog + protocols when missing
 *   npm run bench:audit -- --url http://localhost:3052   # also over HTTP (app started on that DB)
 *
 * Options: --protocols N (default 85000, about 60 fields each), --runs N (default 7), --out PATH, --reseed, --url URL.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import { performance } from 'node:perf_hooks';
import { QueryTypes } from 'sequelize';
import { closeDb, db, selectOne } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis'; // a seed's writes may wake the mail dispatcher (mail/wake.ts)
import { NO_FILTERS, REPORT_NAMES, runReport, type AuditFilters } from '../../src/lib/server/audit-stats';
import { seedAuditData } from './audit-seed';
import { describeError } from './lib';

function arg(name: string, fallback: string): string {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
}
const PROTOCOLS = Number(arg('protocols', '85000'));
const RUNS = Number(arg('runs', '7'));
const OUT = arg('out', '.bench/audit.json');
const URL_BASE = arg('url', '');
const GOAL_MS = 300;

const median = (xs: number[]) => {
	const s = [...xs].sort((a, b) => a - b);
	return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

async function ensureData() {
	const users = await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM users');
	if (!users || users.n === 0) {
		console.error('[bench:audit] seeding accounts and the demo catalog');
		const { seedAccounts } = await import('../../db/seeds/accounts');
		const { seedCatalog } = await import('../../db/seeds/catalog');
		await seedAccounts();
		await seedCatalog();
	}
	const have = await selectOne<{ n: number; f: number }>(`SELECT COUNT(*) AS n, COALESCE(SUM(fields_entered), 0) AS f FROM passes WHERE status = 'submitted'`);
	if (have && have.f >= PROTOCOLS * 55 && !process.argv.includes('--reseed')) {
		console.error(`[bench:audit] using existing data: ${have.n} passes, ${have.f} fields entered`);
		return null;
	}
	console.error(`[bench:audit] seeding ${PROTOCOLS} protocols …`);
	const s = await seedAuditData({ protocols: PROTOCOLS });
	console.error(`[bench:audit] seeded in ${s.seconds.toFixed(1)} s: ${JSON.stringify(s)}`);
	return s;
}

/** Capture the SQL a report runs, to EXPLAIN it. */
function captureQueries(): { take: () => Array<{ sql: string; replacements: unknown }>; stop: () => void } {
	const seq = db();
	const original = seq.query.bind(seq);
	let log: Array<{ sql: string; replacements: unknown }> = [];
	(seq as unknown as { query: unknown }).query = (sql: string, options: { replacements?: unknown }) => {
		if (typeof sql === 'string' && /^\s*SELECT/i.test(sql)) log.push({ sql, replacements: options?.replacements });
		return original(sql, options as never);
	};
	return {
		take: () => {
			const out = log;
			log = [];
			return out;
		},
		stop: () => {
			(seq as unknown as { query: unknown }).query = original;
		}
	};
}

async function main() {
	const seeded = await ensureData();
	const counts = await selectOne<Record<string, number>>(
		`SELECT (SELECT COUNT(*) FROM protocols) AS protocols, (SELECT COUNT(*) FROM passes) AS passes,
		        (SELECT COALESCE(SUM(fields_entered),0) FROM passes WHERE status='submitted') AS fields_entered,
		        (SELECT COUNT(*) FROM discrepancies) AS discrepancies, (SELECT COUNT(*) FROM error_events) AS error_events,
		        (SELECT COUNT(*) FROM audit_fields) AS audit_fields, (SELECT COUNT(*) FROM agreement_pairs) AS agreement_pairs`
	);
	const scorer = (await selectOne<{ id: number }>(`SELECT scorer_id AS id FROM error_events GROUP BY scorer_id ORDER BY COUNT(*) DESC LIMIT 1`))?.id ?? null;
	const battery = (await selectOne<{ id: number }>(`SELECT id FROM batteries WHERE code = 'core-adult'`))?.id ?? null;
	const today = new Date();
	const from = new Date(today.getTime() - 56 * 86_400_000).toISOString().slice(0, 10);
	const variants: Array<{ name: string; filters: AuditFilters; query: string }> = [
		{ name: 'all', filters: NO_FILTERS, query: '' },
		{ name: 'scorer+kind', filters: { ...NO_FILTERS, scorer, kind: 'transposition' }, query: `scorer=${scorer}&kind=transposition` },
		{ name: 'test+8 weeks', filters: { ...NO_FILTERS, test: 'speeded-match', from }, query: `test=speeded-match&from=${from}` },
		{ name: 'battery', filters: { ...NO_FILTERS, battery }, query: `battery=${battery}` }
	];

	const results: Array<{ report: string; variant: string; ms: number; rows: number; http_ms?: number }> = [];
	const explains: Record<string, Array<Record<string, unknown>>> = {};
	const cap = captureQueries();
	for (const report of REPORT_NAMES) {
		for (const v of variants) {
			cap.take();
			const first = await runReport(report, v.filters); // warm-up, and the queries to EXPLAIN
			const queries = cap.take();
			const times: number[] = [];
			for (let i = 0; i < RUNS; i++) {
				const t0 = performance.now();
				await runReport(report, v.filters);
				times.push(performance.now() - t0);
			}
			results.push({ report, variant: v.name, ms: median(times), rows: first.rows.length });
			if (v.name === 'all' || v.name === 'scorer+kind') {
				for (const q of queries) {
					if (/FROM users|FROM tests|FROM domains/.test(q.sql)) continue; // name look-ups
					const plan = (await db().query(`EXPLAIN ${q.sql}`, { type: QueryTypes.SELECT, replacements: q.replacements as never })) as Array<
						Record<string, unknown>
					>;
					explains[`${report} [${v.name}] ${q.sql.replace(/\s+/g, ' ').slice(0, 90)}…`] = plan.map((p) => ({
						table: p.table,
						type: p.type,
						key: p.key,
						rows: p.rows,
						Extra: p.Extra
					}));
				}
			}
		}
	}
	cap.stop();

	if (URL_BASE) {
		const { Client } = await import('../../tests/helpers/http');
		const c = new Client(URL_BASE);
		if (!(await c.signIn('lee.lead@demo.crosstally.test'))) throw new Error(`could not sign in as the lead at ${URL_BASE}`);
		for (const r of results) {
			const v = variants.find((x) => x.name === r.variant)!;
			const path = `/api/v1/audit/${r.report}${v.query ? `?${v.query}` : ''}`;
			await (await c.get(path)).arrayBuffer();
			const times: number[] = [];
			for (let i = 0; i < RUNS; i++) {
				const t0 = performance.now();
				const res = await c.get(path);
				await res.arrayBuffer();
				if (res.status !== 200) throw new Error(`${path}: HTTP ${res.status}`);
				times.push(performance.now() - t0);
			}
			r.http_ms = median(times);
		}
	}

	console.log(
		`\nAudit reports over ${counts?.protocols} protocols, ${counts?.fields_entered} fields entered, ${counts?.error_events} error events, ${counts?.agreement_pairs} agreement pairs (median of ${RUNS})\n`
	);
	console.log(`${'report'.padEnd(20)}${'filters'.padEnd(16)}${'rows'.padStart(7)}${'service ms'.padStart(12)}${URL_BASE ? 'HTTP ms'.padStart(10) : ''}  goal`);
	for (const r of results) {
		const worst = Math.max(r.ms, r.http_ms ?? 0);
		console.log(
			`${r.report.padEnd(20)}${r.variant.padEnd(16)}${String(r.rows).padStart(7)}${r.ms.toFixed(1).padStart(12)}${URL_BASE ? (r.http_ms ?? 0).toFixed(1).padStart(10) : ''}  ${worst < GOAL_MS ? 'ok' : 'SLOW'}`
		);
	}
	console.log('\nEXPLAIN (table / access type / key / rows examined / extra):');
	for (const [q, plan] of Object.entries(explains)) {
		console.log(`  ${q}`);
		for (const p of plan)
			console.log(
				`      ${String(p.table).padEnd(6)} ${String(p.type).padEnd(7)} ${String(p.key ?? '— no index —').padEnd(28)} rows≈${String(p.rows).padEnd(8)} ${p.Extra ?? ''}`
			);
	}
	const fullScans = Object.entries(explains).filter(([, plan]) => plan.some((p) => p.type === 'ALL' && p.key === null));
	console.log(fullScans.length ? `\n${fullScans.length} queries scan a table without an index.` : '\nEvery query reads through an index.');

	const worst = Math.max(...results.map((r) => Math.max(r.ms, r.http_ms ?? 0)));
	const out = { bench: 'audit', goal_ms: GOAL_MS, runs: RUNS, data: counts, seeded, worst_ms: worst, ok: worst < GOAL_MS, results, explain: explains };
	mkdirSync(dirname(OUT), { recursive: true });
	writeFileSync(OUT, JSON.stringify(out, null, 2));
	console.log(
		`BENCH_JSON ${JSON.stringify({ bench: 'audit', goal_ms: GOAL_MS, worst_ms: Number(worst.toFixed(1)), ok: worst < GOAL_MS, data: counts, results })}`
	);
}

main()
	.catch((e) => {
		console.error(`[bench:audit] ${describeError(e)}`);
		process.exitCode = 1;
	})
	.finally(() => Promise.all([closeDb(), closeRedis()]));

/**
 * `npm run bench:mail` — 1,000 protocols reaching review at once: the time until every first
 * e-mail is caught by the mail fake, and e-mails per second, through the whole pipeline (outbox
 * row in the reconciliation transaction → dispatcher → BullMQ on Redis → worker renders from the
 * database → nodemailer → SMTP fake).
 *
 * Needs the services, not the app:  CROSSTALLY_MODE=test bash scripts/services.sh up
 * (MariaDB, Redis, mail fake, migrations) and then  CROSSTALLY_MODE=test npm run bench:mail.
 * It reads $CROSSTALLY_DATA_DIR/crosstally.env (default .data/test, or .data/demo when
 * CROSSTALLY_MODE is not test), starts its own worker process(es) and stops them at the end. Do
 * not run it while another worker uses the same Redis (npm start / npm test): that one would take
 * part of the work. Its bench rows (users, catalog, protocols, outbox, mail_log) are removed
 * afterwards; the caught messages stay in the fake (tagged with the run id in the subject).
 *
 * Options: --protocols N (default 1000), --workers N (default 1), --concurrency N (worker
 * concurrency, default 32 as the worker's own), --out PATH (default .bench/mail.json), --profile DIR (a CPU profile of the
 * worker, written when it stops).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, openSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { performance } from 'node:perf_hooks';
import { randomBytes } from 'node:crypto';

function arg(name: string, fallback: string): string {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
}

const ROOT = resolve(import.meta.dirname, '../..');
const PROTOCOLS = Number(arg('protocols', '1000'));
const WORKERS = Number(arg('workers', '1'));
const CONCURRENCY = Number(arg('concurrency', '32'));
const OUT = arg('out', '.bench/mail.json');
const PROFILE = arg('profile', '');
const DATA_DIR = process.env.CROSSTALLY_DATA_DIR ?? join(ROOT, process.env.CROSSTALLY_MODE === 'test' ? '.data/test' : '.data/demo');
const ENV_FILE = process.env.ENV_FILE ?? join(DATA_DIR, 'crosstally.env');
if (!existsSync(ENV_FILE)) {
	console.error(`bench:mail: no ${ENV_FILE}; start the services first: CROSSTALLY_MODE=test bash scripts/services.sh up`);
	process.exit(2);
}
process.loadEnvFile(ENV_FILE);

// config.ts reads the environment when first imported: import the app modules after loading it.
const { exec, select, selectOne, transaction, closeDb } = await import('../../src/lib/server/db');
const { notifyReviewStarted } = await import('../../src/lib/server/mail/reminders/scheduling');
const { saveReviewMailSettings, REVIEW_MAIL_SETTING } = await import('../../src/lib/server/mail/reminders/settings');
const { Queue } = await import('bullmq');
const { bullConnection } = await import('../../src/lib/server/redis');
const { MAIL_QUEUE } = await import('../../src/lib/server/mail/queue');

const FAKE = process.env.MAILFAKE_URL ?? `http://127.0.0.1:${process.env.MAILFAKE_PORT ?? 2536}`;
const RUN = randomBytes(3).toString('hex');
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const log = (s: string) => console.error(`[bench:mail] ${s}`);

interface Caught {
	receivedAt: string;
	subject: string;
	headers: Record<string, string>;
	envelope: { to: string[] };
}

const reviewerEmail = `bench.reviewer.${RUN}@bench.crosstally.test`;

async function fakeCaught(): Promise<Caught[]> {
	const res = await fetch(`${FAKE}/messages?to=${encodeURIComponent(reviewerEmail)}`);
	if (!res.ok) throw new Error(`mail fake answered ${res.status}`);
	return (await res.json()) as Caught[];
}

/** How many messages the reviewer got, without the messages: the fake's CPU is not the bench's to spend. */
async function fakeCount(): Promise<number> {
	const res = await fetch(`${FAKE}/messages?to=${encodeURIComponent(reviewerEmail)}&limit=0&summary=1`);
	if (!res.ok) throw new Error(`mail fake answered ${res.status}`);
	await res.arrayBuffer();
	return Number(res.headers.get('x-total-count'));
}

async function setUp() {
	await fetch(`${FAKE}/health`).catch(() => {
		throw new Error(`the mail fake does not answer at ${FAKE}`);
	});
	const users: number[] = [];
	for (const [who, roles] of [
		['first', 'scorer'],
		['second', 'scorer'],
		['reviewer', 'reviewer']
	] as const) {
		const email = who === 'reviewer' ? reviewerEmail : `bench.${who}.${RUN}@bench.crosstally.test`;
		const r = await exec(`INSERT INTO users (email, name, roles) VALUES (:email, :name, :roles)`, { email, name: `Bench ${who}`, roles });
		users.push(r.insertId);
	}
	await exec(`INSERT IGNORE INTO domains (code, name, position) VALUES ('bench-domain', 'Bench domain', 999)`);
	await exec(
		`INSERT INTO tests (code, version, name, domain, direction, raw_min, raw_max, raw_decimals, reported)
		 VALUES (:code, 1, 'Bench Recall', 'bench-domain', 'higher_better', 0, 60, 0, 'z,standard,scaled,t,percentile')`,
		{ code: `bench-${RUN}` }
	);
	const testId = (await selectOne<{ id: number }>(`SELECT id FROM tests WHERE code = :code`, { code: `bench-${RUN}` }))!.id;
	const ns = await exec(`INSERT INTO norm_sets (code, name, source, age_rule) VALUES (:code, 'Bench norms', 'invented', '{}')`, { code: `bench-${RUN}` });
	const bt = await exec(`INSERT INTO batteries (code, name, norm_set_id) VALUES (:code, 'Bench battery', :ns)`, { code: `bench-${RUN}`, ns: ns.insertId });
	const protocols: number[] = [];
	const examinees: number[] = [];
	for (let i = 0; i < PROTOCOLS; i++) {
		const ex = await exec(`INSERT INTO examinees (code, name, birth_date) VALUES (:code, 'Bench Person', '1970-01-01')`, {
			code: `B${RUN}-${String(i).padStart(4, '0')}`
		});
		examinees.push(ex.insertId);
		const p = await exec(
			`INSERT INTO protocols (examinee_id, battery_id, norm_set_id, test_date, age_text, age_months, status, first_scorer_id, second_scorer_id, reviewer_id)
			 VALUES (:ex, :bt, :ns, '2025-03-04', '55;2', 662, 'in_review', :a, :b, :c)`,
			{ ex: ex.insertId, bt: bt.insertId, ns: ns.insertId, a: users[0], b: users[1], c: users[2] }
		);
		protocols.push(p.insertId);
		await exec(`INSERT INTO protocol_tests (protocol_id, position, test_id) VALUES (:p, 0, :t)`, { p: p.insertId, t: testId });
		await exec(
			`INSERT INTO discrepancies (protocol_id, round, position, test_code, field, pass, kind, value, other, expected, out_of_range) VALUES
			 (:p, 1, 0, :tc, 'standard', 'first', 'transposition', '151', '115', '115', 0),
			 (:p, 1, 1, :tc, 'z', 'second', 'sign_flip', '-1.00', '1.00', '1.00', 0),
			 (:p, 1, 2, :tc, 'raw', 'both', 'wrong_digit', '34', '74', NULL, 0)`,
			{ p: p.insertId, tc: `bench-${RUN}` }
		);
	}
	return { users, testId, normSetId: ns.insertId, batteryId: bt.insertId, protocols, examinees, reviewerId: users[2] };
}

async function tearDown(s: Awaited<ReturnType<typeof setUp>>, savedSetting: unknown) {
	await exec(`UPDATE protocols SET status = 'verified' WHERE id IN (:ids)`, { ids: s.protocols });
	const keys = (
		await select<{ idempotency_key: string }>(`SELECT idempotency_key FROM outbox WHERE idempotency_key LIKE :k`, {
			k: `review:%:u${s.reviewerId}:%`
		})
	).map((r) => r.idempotency_key);
	// drop the delayed reminder jobs the run scheduled (their protocols are gone)
	const q = new Queue(MAIL_QUEUE, { connection: bullConnection() });
	for (const k of keys) await q.remove(k.replace(/:/g, '_')).catch(() => 0);
	await q.close();
	for (let i = 0; i < keys.length; i += 500) {
		const part = keys.slice(i, i + 500);
		await exec(`DELETE FROM outbox WHERE idempotency_key IN (:part)`, { part });
		await exec(`DELETE FROM mail_log WHERE idempotency_key IN (:part)`, { part });
	}
	await exec(`DELETE FROM protocols WHERE id IN (:ids)`, { ids: s.protocols });
	await exec(`DELETE FROM examinees WHERE id IN (:ids)`, { ids: s.examinees });
	await exec(`DELETE FROM batteries WHERE id = :id`, { id: s.batteryId });
	await exec(`DELETE FROM norm_sets WHERE id = :id`, { id: s.normSetId });
	await exec(`DELETE FROM tests WHERE id = :id`, { id: s.testId });
	await exec(`DELETE FROM users WHERE id IN (:ids)`, { ids: s.users });
	if (savedSetting === null) await exec(`DELETE FROM settings WHERE name = :n`, { n: REVIEW_MAIL_SETTING });
	else
		await exec(`UPDATE settings SET value = :v WHERE name = :n`, {
			n: REVIEW_MAIL_SETTING,
			v: typeof savedSetting === 'string' ? savedSetting : JSON.stringify(savedSetting)
		});
}

function startWorkers(): Promise<ChildProcess[]> {
	const logFile = join(DATA_DIR, 'run', 'bench-worker.log');
	mkdirSync(dirname(logFile), { recursive: true });
	const procs: ChildProcess[] = [];
	const ready: Promise<void>[] = [];
	for (let i = 0; i < WORKERS; i++) {
		// --profile DIR: the worker writes a V8 CPU profile there when it stops (open it in Chrome's DevTools)
		// one process with tsx's loader, as scripts/lib/setup.sh start_worker (the tsx command's wrapper may KILL it on TERM)
		const node = [...(PROFILE ? ['--cpu-prof', `--cpu-prof-dir=${resolve(PROFILE)}`] : []), '--import', 'tsx'];
		const p = spawn(process.execPath, [`--env-file=${ENV_FILE}`, ...node, 'scripts/worker.ts'], {
			cwd: ROOT,
			env: { ...process.env, WORKER_CONCURRENCY: String(CONCURRENCY) },
			stdio: ['ignore', 'pipe', openSync(logFile, 'a')]
		});
		procs.push(p);
		ready.push(
			new Promise((res, rej) => {
				const t = setTimeout(() => rej(new Error('worker did not start in 60 s')), 60_000);
				p.stdout!.on('data', (d: Buffer) => {
					if (d.toString().includes('[worker] started')) {
						clearTimeout(t);
						res();
					}
				});
				p.on('exit', (code) => rej(new Error(`worker exited (${code}); see ${logFile}`)));
			})
		);
	}
	return Promise.all(ready).then(() => procs);
}

async function stopWorkers(procs: ChildProcess[]) {
	await Promise.all(
		procs.map(
			(p) =>
				new Promise<void>((res) => {
					if (p.exitCode !== null) return res();
					p.once('exit', () => res());
					p.kill('SIGTERM');
					setTimeout(() => p.exitCode === null && p.kill('SIGKILL'), 10_000).unref();
				})
		)
	);
}

const pct = (xs: number[], p: number) => {
	const s = [...xs].sort((a, b) => a - b);
	return s[Math.min(s.length - 1, Math.max(0, Math.ceil((p / 100) * s.length) - 1))];
};

async function main() {
	const saved = (await selectOne<{ value: unknown }>(`SELECT value FROM settings WHERE name = :n`, { n: REVIEW_MAIL_SETTING }))?.value ?? null;
	// one first e-mail per protocol in the measured window; the reminders it schedules are a day away
	await saveReviewMailSettings({ reminderIntervalMinutes: 1440, escalateAfterReminders: 3 });
	log(`run ${RUN}: inserting ${PROTOCOLS} protocols in review (3 discrepancies each)`);
	const s = await setUp();
	let procs: ChildProcess[] = [];
	try {
		procs = await startWorkers();
		log(`${WORKERS} worker(s) up (concurrency ${CONCURRENCY}); ${PROTOCOLS} reconciliation transactions at once`);
		const committedAt = new Map<number, number>();
		const t0 = performance.now();
		const wall0 = Date.now();
		// as many at once as the connection pool holds (DB_POOL_MAX, 20): all 1,000 at once only queued
		// for a connection, and on a loaded machine the wait passed the pool's 5 s acquire timeout
		let nextProtocol = 0;
		await Promise.all(
			Array.from({ length: Number(process.env.DB_POOL_MAX ?? 20) }, async () => {
				while (nextProtocol < s.protocols.length) {
					const id = s.protocols[nextProtocol++];
					await transaction(async (t) => {
						await exec(`UPDATE protocols SET status_changed_at = CURRENT_TIMESTAMP(3) WHERE id = :id`, { id }, t);
						await notifyReviewStarted(id, 1, s.reviewerId, t);
					});
					committedAt.set(id, Date.now());
				}
			})
		);
		const tCommitted = performance.now() - t0;
		let caught: Caught[] = [];
		const deadline = Date.now() + 10 * 60_000;
		for (;;) {
			// count only while the mail arrives (a full list is ~9 KB a message); read them all once at the end
			const n = await fakeCount();
			if (n >= PROTOCOLS) {
				caught = (await fakeCaught()).filter((m) => m.headers['x-crosstally-key']?.endsWith(':0'));
				if (caught.length >= PROTOCOLS) break;
			}
			if (Date.now() > deadline) throw new Error(`only ${n} of ${PROTOCOLS} e-mails after 10 minutes`);
			await sleep(250); // times come from the fake's receivedAt, not from this poll
		}
		const tFirst = Math.min(...caught.map((m) => Date.parse(m.receivedAt))) - wall0;
		const lastAt = Math.max(...caught.map((m) => Date.parse(m.receivedAt)));
		const totalMs = lastAt - wall0;
		const keys = caught.map((m) => m.headers['x-crosstally-key']);
		const duplicates = keys.length - new Set(keys).size;
		const latencies = caught.map((m) => {
			const pid = Number(m.headers['x-crosstally-key'].split(':')[1]);
			return Date.parse(m.receivedAt) - (committedAt.get(pid) ?? wall0);
		});
		const firstReceived = Math.min(...caught.map((m) => Date.parse(m.receivedAt)));
		const result = {
			bench: 'mail',
			protocols: PROTOCOLS,
			workers: WORKERS,
			concurrency: CONCURRENCY,
			commit_ms: Math.round(tCommitted),
			first_mail_ms: tFirst,
			all_caught_ms: totalMs,
			emails_per_second: +(PROTOCOLS / (totalMs / 1000)).toFixed(1),
			steady_emails_per_second: +((PROTOCOLS - 1) / ((lastAt - firstReceived) / 1000)).toFixed(1),
			latency_ms: { p50: pct(latencies, 50), p95: pct(latencies, 95), max: Math.max(...latencies) },
			duplicates,
			node: process.version,
			at: new Date().toISOString()
		};
		console.log(`protocols reaching review at once : ${PROTOCOLS}`);
		console.log(`workers × concurrency             : ${WORKERS} × ${CONCURRENCY}`);
		console.log(`1,000 transactions committed in   : ${result.commit_ms} ms`);
		console.log(`first e-mail caught after         : ${result.first_mail_ms} ms`);
		console.log(`all first e-mails caught after    : ${result.all_caught_ms} ms`);
		console.log(`e-mails per second (whole run)    : ${result.emails_per_second}`);
		console.log(`e-mails per second (first→last)   : ${result.steady_emails_per_second}`);
		console.log(`commit → caught latency p50/p95   : ${result.latency_ms.p50} / ${result.latency_ms.p95} ms (max ${result.latency_ms.max})`);
		console.log(`duplicate sends                   : ${duplicates}`);
		console.log(`BENCH_JSON ${JSON.stringify(result)}`);
		mkdirSync(dirname(OUT), { recursive: true });
		writeFileSync(OUT, JSON.stringify(result, null, 2) + '\n');
	} finally {
		await stopWorkers(procs);
		await tearDown(s, saved);
		await closeDb();
	}
}

main()
	.then(() => process.exit(0))
	.catch((e) => {
		console.error(`[bench:mail] failed: ${e instanceof Error ? e.stack : e}`);
		process.exit(1);
	});

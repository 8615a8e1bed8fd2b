/**
 * The cluster run (started by scripts/cluster/cluster.sh once everything is up): the load test
 * (scripts/load.ts, all its counting checks) through HAProxy while, one after the other, a database
 * node, an app server and a worker are stopped by PID and started again; then the checks the load
 * test cannot make on one server:
 * - a second pass submitted at the same moment to both app servers directly (two database nodes)
 *   reconciles once;
 * - every outbox row delivered exactly once (mail_log and the mail fake's catch, by idempotency key);
 * - a session made on one app server works on the other; sign-out and idle logoff hold on both;
 * - the audit figures read the same on every node; what a lead sees while a node rejoins;
 * - retries of transactions (the `[tx] retry` lines of every app server and worker) and HAProxy's.
 * Prints a summary and writes .bench/cluster.json. Exit 1 when anything failed.
 * Options (environment): CLUSTER_USERS (20), CLUSTER_DURATION (90), CLUSTER_DOUBLE (8),
 * CLUSTER_SIGNAL (TERM), CLUSTER_STOP_DB (2), CLUSTER_IDLE_CHECK (1).
 */
import { spawn, execFile } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { cpus } from 'node:os';
import { join, resolve } from 'node:path';
import { promisify } from 'node:util';
import * as mariadb from 'mariadb';

const ROOT = resolve(import.meta.dirname, '../..');
const DATA = process.env.CROSSTALLY_DATA_DIR ?? join(ROOT, '.data/cluster');
const RUN = process.env.RUN_DIR ?? join(DATA, 'run');
const ENV_FILE = join(DATA, 'crosstally.env');
process.loadEnvFile(ENV_FILE);
const B = Number(process.env.CLUSTER_BASE ?? 4400);
const USERS = Number(process.env.CLUSTER_USERS ?? 10);
const DURATION = Number(process.env.CLUSTER_DURATION ?? 90);
const DOUBLES = Number(process.env.CLUSTER_DOUBLE ?? 8);
const SIGNAL = (process.env.CLUSTER_SIGNAL ?? 'TERM').replace(/^SIG/, '');
const NODE_SIGNAL = `SIG${SIGNAL}` as NodeJS.Signals;
const STOP_DB = Number(process.env.CLUSTER_STOP_DB ?? 2);
const LB = `http://127.0.0.1:${B + 80}`;
const APP = (n: number) => `http://127.0.0.1:${B + 60 + n}`;
const OUT = join(ROOT, '.bench/cluster.json');
const LOAD_OUT = join(ROOT, '.bench/cluster-load.json');
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };

const { Client, ACCOUNTS } = await import('../../tests/helpers/http');
const { select, selectOne, closeDb } = await import('../../src/lib/server/db');
const { closeRedis } = await import('../../src/lib/server/redis');
const { correctScores, userId } = await import('../../tests/helpers/workflow');
type AnyClient = InstanceType<typeof Client>;

const log = (s: string) => console.error(`[test:cluster] ${s}`);
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const sh = promisify(execFile);
const cluster = (...args: string[]) => sh('bash', [join(ROOT, 'scripts/cluster/cluster.sh'), ...args], { cwd: ROOT, env: process.env, maxBuffer: 1 << 20 });
const pidOf = (name: string) => Number(readFileSync(join(RUN, `${name}.pid`), 'utf8').trim());
const failures: string[] = [];
const fail = (s: string) => {
	failures.push(s);
	log(`FAIL ${s}`);
};

/** Stop a process by the PID in its pid file and wait until it is gone. */
async function stopByPid(name: string): Promise<number> {
	const pid = pidOf(name);
	process.kill(pid, NODE_SIGNAL);
	for (let i = 0; i < 1000; i++) {
		try {
			process.kill(pid, 0);
		} catch {
			return pid;
		}
		await sleep(100);
	}
	process.kill(pid, 'SIGKILL');
	return pid;
}
/** When each stopped app server's process had exited (the balancer notices within seconds after). */
const exitedAt = new Map<string, number>();

async function signedAt(base: string, email: string): Promise<AnyClient> {
	const c = new Client(base, LB);
	if (!(await c.signIn(email))) throw new Error(`could not sign in as ${email} at ${base}`);
	return c;
}
const at = (c: AnyClient, base: string): AnyClient => Object.assign(Object.create(Object.getPrototypeOf(c)), c, { base });

function nodeConn(n: number) {
	return mariadb.createConnection({
		host: '127.0.0.1',
		port: B + n,
		user: process.env.DB_USER,
		password: process.env.DB_PASSWORD,
		database: process.env.DB_NAME,
		connectTimeout: 1500,
		bigIntAsNumber: true,
		decimalAsNumber: true
	});
}

// ---------------------------------------------------------------- during the load: the stops
interface Stop {
	what: string;
	pid: number;
	stoppedAt: number;
	startedAt: number;
	/** seconds from the start command to the node Synced / the app answering /health */
	restartSeconds: number;
	downSeconds: number;
}
const stops: Stop[] = [];
const rejoinView: string[] = [];

async function leadView(lead: AnyClient): Promise<string> {
	const t0 = Date.now();
	const r = await lead.request('/audit', { headers: { accept: 'text/html' } }).catch((e) => ({ status: `network error ${e.message}` }) as unknown as Response);
	return `${r.status} in ${Date.now() - t0} ms`;
}

async function directRead(n: number): Promise<string> {
	let c: mariadb.Connection | null = null;
	try {
		c = await nodeConn(n);
		const rows = (await c.query('SELECT COUNT(*) AS n FROM audit_events')) as { n: number }[];
		return `answers (${rows[0].n} audit events)`;
	} catch (e) {
		const err = e as { errno?: number; code?: string; message: string };
		return `refuses: ${err.errno ?? ''} ${err.code ?? ''} ${err.message.split('\n')[0].slice(0, 90)}`.trim();
	} finally {
		await c?.end().catch(() => undefined);
	}
}

async function stopDb(lead: AnyClient) {
	const n = STOP_DB;
	log(`stopping db${n} by PID (${SIGNAL})`);
	const pid = pidOf(`db${n}`);
	const stoppedAt = Date.now();
	await cluster('stop-db', String(n), SIGNAL);
	rejoinView.push(`db${n} stopped: the lead's audit page through the balancer ${await leadView(lead)}; db${n} itself ${await directRead(n)}`);
	await sleep(6000);
	const startedAt = Date.now();
	const starting = cluster('start-db', String(n));
	// while it joins: what the lead sees, and what the node itself answers
	let joined = false;
	starting.then(
		() => (joined = true),
		() => (joined = true)
	);
	let samples = 0;
	while (!joined && samples < 60) {
		await sleep(1500);
		if (joined) break;
		samples++;
		if (samples <= 2 || samples % 12 === 0)
			rejoinView.push(
				`db${n} joining (+${((Date.now() - startedAt) / 1000).toFixed(1)} s): lead's audit page ${await leadView(lead)}; db${n} direct ${await directRead(n)}`
			);
	}
	const { stdout } = await starting;
	const restartSeconds = Number(stdout.trim().split('\n').pop());
	rejoinView.push(`db${n} Synced after ${restartSeconds} s: lead's audit page ${await leadView(lead)}; db${n} direct ${await directRead(n)}`);
	stops.push({ what: `db${n}`, pid, stoppedAt, startedAt, restartSeconds, downSeconds: (Date.now() - stoppedAt) / 1000 });
	log(`db${n} rejoined (Synced) ${restartSeconds} s after its start`);
}

async function stopApp(n: number) {
	log(`stopping app${n} by PID (${SIGNAL})`);
	const stoppedAt = Date.now();
	const pid = await stopByPid(`app${n}`);
	exitedAt.set(`app${n}`, Date.now());
	await sleep(4000);
	const startedAt = Date.now();
	await cluster('start-app', String(n));
	stops.push({ what: `app${n}`, pid, stoppedAt, startedAt, restartSeconds: (Date.now() - startedAt) / 1000, downSeconds: (Date.now() - stoppedAt) / 1000 });
	log(`app${n} back after ${((Date.now() - stoppedAt) / 1000).toFixed(1)} s`);
}

async function stopWorker(n: number) {
	log(`stopping worker${n} by PID (${SIGNAL})`);
	const stoppedAt = Date.now();
	const pid = await stopByPid(`worker${n}`);
	await sleep(4000);
	const startedAt = Date.now();
	await cluster('start-worker', String(n));
	stops.push({ what: `worker${n}`, pid, stoppedAt, startedAt, restartSeconds: (Date.now() - startedAt) / 1000, downSeconds: (Date.now() - stoppedAt) / 1000 });
}

// ---------------------------------------------------------------- after the load: the checks
async function submitPassOn(c: AnyClient, id: number, scores: unknown) {
	const pass = await (await c.get(`/api/v1/protocols/${id}/pass`)).json();
	const put = await c.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores, draftVersion: pass.draftVersion } });
	if (put.status !== 200) throw new Error(`save draft on ${id}: ${put.status} ${await put.text()}`);
	return (await put.json()).draftVersion as number;
}

/** The same second submission at the same moment to app1 and app2 (each on its own database node). */
async function doubleSubmits(lead: AnyClient, first: AnyClient, second: AnyClient) {
	const battery = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'brief-screen'"))!.id;
	const ids = { a: await userId(ACCOUNTS.scorer), b: await userId(ACCOUNTS.scorer2), r: await userId(ACCOUNTS.reviewer) };
	const results: { id: number; statuses: number[]; reconciles: number; submits: number; discrepancies: number; engine: number | null; outbox: number }[] = [];
	for (let i = 0; i < DOUBLES; i++) {
		const created = await lead.action('/protocols/new', {
			code: `CL-DBL-${Date.now().toString(36)}-${i}`.toUpperCase(),
			birthDate: '1988-05-17',
			sex: 'F',
			educationYears: '14',
			batteryId: String(battery),
			testDate: '2026-11-20',
			firstScorerId: String(ids.a),
			secondScorerId: String(ids.b),
			reviewerId: String(ids.r)
		});
		const id = Number(String(created.body.location ?? '').match(/\/protocols\/(\d+)/)?.[1]);
		if (!id) throw new Error(`double submit: could not create a protocol: ${JSON.stringify(created.body)}`);
		const scores = await correctScores(id, RAWS);
		const other = JSON.parse(JSON.stringify(scores));
		other['speeded-match'].z = String(-Number(scores['speeded-match'].z));
		const v1 = await submitPassOn(first, id, scores);
		const r1 = await first.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: v1 } });
		if (r1.status !== 200) throw new Error(`double submit: first pass of ${id}: ${r1.status}`);
		const v2 = await submitPassOn(second, id, other);
		// the one session, two app servers, two database nodes, at once
		const rs = await Promise.all(
			[at(second, APP(1)), at(second, APP(2))].map((c) => c.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: v2 } }))
		);
		const bodies = await Promise.all(rs.map((r) => r.json().catch(() => ({}))));
		const ok = bodies.find((_, j) => rs[j].status === 200) as { discrepancies?: number } | undefined;
		const a = await selectOne<{ reconciles: number; submits: number }>(
			"SELECT SUM(action = 'reconcile') AS reconciles, SUM(action = 'submit_second') AS submits FROM audit_events WHERE protocol_id = :id",
			{ id }
		);
		const d = await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id });
		const o = await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM outbox WHERE kind = 'review_first' AND payload LIKE :p", {
			p: `%"protocolId":${id},%`
		});
		results.push({
			id,
			statuses: rs.map((r) => r.status).sort(),
			reconciles: Number(a?.reconciles ?? 0),
			submits: Number(a?.submits ?? 0),
			discrepancies: Number(d?.n ?? 0),
			engine: ok?.discrepancies ?? null,
			outbox: Number(o?.n ?? 0)
		});
	}
	for (const r of results) {
		if (r.statuses.join() !== '200,409') fail(`double submit of protocol ${r.id} on app1 + app2: ${r.statuses.join('/')} (want 200/409)`);
		if (r.reconciles !== 1 || r.submits !== 1)
			fail(`double submit of protocol ${r.id}: ${r.reconciles} reconcile and ${r.submits} submit_second audit events (want 1 and 1)`);
		if (r.engine === null || r.discrepancies !== r.engine)
			fail(`double submit of protocol ${r.id}: ${r.discrepancies} discrepancies stored, the engine said ${r.engine}`);
	}
	return results;
}

/**
 * Every outbox row that is due is delivered exactly once: one message with its key in the mail fake's
 * catch and a 'sent' mail_log row. Not due: a reminder whose notBefore lies ahead (the next one is
 * scheduled after each delivery). A review message for a protocol already signed off when the worker
 * got to it is skipped by design (nothing to remind of); it is counted apart, never as a delivery.
 */
async function mailExactlyOnce() {
	type Row = { idempotency_key: string; kind: string; payload: unknown; dispatched_at: Date | null };
	const load = async () => {
		const rows = await select<Row>('SELECT idempotency_key, kind, payload, dispatched_at FROM outbox');
		const sent = new Set(
			(await select<{ idempotency_key: string }>("SELECT idempotency_key FROM mail_log WHERE status = 'sent'")).map((r) => r.idempotency_key)
		);
		const inReview = new Set((await select<{ id: number }>("SELECT id FROM protocols WHERE status = 'in_review'")).map((r) => r.id));
		const now = Date.now();
		const payload = (r: Row) => (typeof r.payload === 'string' ? JSON.parse(r.payload) : r.payload) as { notBefore?: number; protocolId?: number };
		const due = rows.filter((r) => !(Number(payload(r).notBefore ?? 0) > now));
		const waiting = due.filter(
			(r) => !sent.has(r.idempotency_key) && (r.kind === 'invite' || r.kind === 'reset' || inReview.has(Number(payload(r).protocolId)))
		);
		return { rows, due, sent, waiting, undispatched: due.filter((r) => !r.dispatched_at).length };
	};
	const t0 = Date.now();
	let state = await load();
	while (Date.now() - t0 < 90_000 && (state.undispatched > 0 || state.waiting.length > 0)) {
		await sleep(1000);
		state = await load();
	}
	const caught = (await (await fetch(`${process.env.MAILFAKE_URL}/messages`)).json()) as { headers: Record<string, string> }[];
	const byKey = new Map<string, number>();
	for (const m of caught) {
		const k = m.headers['x-crosstally-key'];
		if (k) byKey.set(k, (byKey.get(k) ?? 0) + 1);
	}
	const outKeys = new Set(state.rows.map((r) => r.idempotency_key));
	let duplicates = 0,
		notCaught = 0,
		skipped = 0;
	for (const r of state.due) {
		const n = byKey.get(r.idempotency_key) ?? 0;
		if (n > 1) duplicates += n - 1;
		if (state.sent.has(r.idempotency_key) && n !== 1) notCaught++;
		if (!state.sent.has(r.idempotency_key)) skipped++;
	}
	const strangers = [...byKey.keys()].filter((k) => !outKeys.has(k)).length;
	const uncertain = await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM mail_log WHERE status = 'sending'");
	if (Number(uncertain?.n)) fail(`${uncertain?.n} message(s) left claimed mid-send ('sending': a worker stopped between claim and send)`);
	if (duplicates) fail(`${duplicates} duplicate e-mail(s) in the mail fake's catch`);
	if (notCaught) fail(`${notCaught} message(s) marked sent that the mail fake did not catch exactly once`);
	if (state.waiting.length)
		fail(
			`${state.waiting.length} due outbox row(s) never delivered: ${state.waiting
				.slice(0, 5)
				.map((r) => r.idempotency_key)
				.join(', ')}`
		);
	if (state.undispatched) fail(`${state.undispatched} due outbox row(s) never dispatched`);
	if (strangers) fail(`${strangers} caught message key(s) with no outbox row`);
	return {
		outbox_rows: state.rows.length,
		due: state.due.length,
		delivered: state.sent.size,
		caught: caught.length,
		duplicates,
		skipped_protocol_no_longer_in_review: skipped - state.waiting.length,
		not_yet_due: state.rows.length - state.due.length,
		seconds_to_drain: Math.round((Date.now() - t0) / 100) / 10
	};
}

async function auditOnEveryNode() {
	const figures: Record<string, unknown> = {};
	const q = `SELECT (SELECT COUNT(*) FROM audit_events) AS events, (SELECT COUNT(*) FROM protocols WHERE status = 'verified') AS verified,
	           (SELECT COUNT(*) FROM discrepancies) AS discrepancies, (SELECT COUNT(*) FROM discrepancies WHERE resolved_at IS NOT NULL) AS resolved`;
	for (const n of [1, 2, 3]) {
		const c = await nodeConn(n);
		try {
			await c.query('SET SESSION wsrep_sync_wait = 1');
			figures[`db${n}`] = ((await c.query(q)) as unknown[])[0];
		} finally {
			await c.end();
		}
	}
	const distinct = new Set(Object.values(figures).map((f) => JSON.stringify(f)));
	if (distinct.size !== 1) fail(`the audit figures differ between nodes: ${JSON.stringify(figures)}`);
	return figures;
}

async function sessionsAcross() {
	const out: Record<string, string | boolean> = {};
	// made on app1, used on app2
	const c = await signedAt(APP(1), ACCOUNTS.reviewer);
	const on2 = await at(c, APP(2)).get('/api/v1/worklist');
	out.made_on_app1_used_on_app2 = on2.status === 200;
	if (on2.status !== 200) fail(`a session made on app1 answers ${on2.status} on app2`);
	// signed out on app2: the old cookie replayed on app1 and app2
	const d = await signedAt(APP(1), ACCOUNTS.scorer3);
	const saved = new Map(d.cookies);
	const so = await at(d, APP(2)).request('/signout', { method: 'POST', form: {} });
	const replay1 = Object.assign(at(d, APP(1)), { cookies: new Map(saved) });
	const replay2 = Object.assign(at(d, APP(2)), { cookies: new Map(saved) });
	const [r1, r2] = [await replay1.get('/api/v1/worklist'), await replay2.get('/api/v1/worklist')];
	out.signout_status = String(so.status);
	out.signed_out_token_on_app1 = String(r1.status);
	out.signed_out_token_on_app2 = String(r2.status);
	out.signout_holds = r1.status === 401 && r2.status === 401;
	if (!out.signout_holds) fail(`a token signed out on app2 still answers ${r1.status} on app1 and ${r2.status} on app2 (want 401 on both)`);
	return out;
}

/**
 * Idle logoff across two app servers. The two behind the balancer run with the normal idle period
 * (30 min), so two more instances of the same build (app3, app4; not behind the balancer) run with
 * IDLE_MINUTES: a session made on app3 works on app4, then, left unused past the period, is
 * refused by both.
 */
const IDLE_MINUTES = 0.2;
let idleServers: Promise<unknown> | null = null;
function startIdleServers() {
	idleServers = Promise.all(
		[3, 4].map((n) =>
			sh('bash', [join(ROOT, 'scripts/cluster/cluster.sh'), 'start-app', String(n)], {
				cwd: ROOT,
				env: { ...process.env, APP_SESSION_IDLE_MINUTES: String(IDLE_MINUTES) }
			})
		)
	);
	idleServers.catch(() => undefined);
}
async function idleAcross() {
	await idleServers;
	const c = await signedAt(APP(3), ACCOUNTS.scorer);
	const fresh = (await at(c, APP(4)).get('/api/v1/worklist')).status;
	await sleep(IDLE_MINUTES * 60_000 + 4000);
	const later4 = (await at(c, APP(4)).get('/api/v1/worklist')).status;
	const later3 = (await at(c, APP(3)).get('/api/v1/worklist')).status;
	if (fresh !== 200) fail(`idle check: a session made on app3 answers ${fresh} on app4`);
	if (later3 !== 401 || later4 !== 401)
		fail(`idle logoff: after ${IDLE_MINUTES * 60 + 4} s unused the session answers ${later3} on app3 and ${later4} on app4 (want 401 on both)`);
	return { idle_seconds: IDLE_MINUTES * 60, made_on_app3_used_on_app4: fresh, after_idle_on_app3: later3, after_idle_on_app4: later4 };
}

function countLogLines(pattern: RegExp) {
	let n = 0;
	for (const f of readdirSync(RUN).filter((x) => /^(app|worker)\d\.log$/.test(x)))
		n += readFileSync(join(RUN, f), 'utf8')
			.split('\n')
			.filter((l) => pattern.test(l)).length;
	return n;
}

async function haproxyRetries() {
	const csv = await (await fetch(`http://127.0.0.1:${B + 81}/;csv`)).text();
	const [head, ...rows] = csv.trim().split('\n');
	const cols = head.replace(/^# /, '').split(',');
	const i = {
		px: cols.indexOf('pxname'),
		sv: cols.indexOf('svname'),
		retr: cols.indexOf('wretr'),
		redis: cols.indexOf('wredis'),
		e5: cols.indexOf('hrsp_5xx')
	};
	const out: Record<string, { retries: number; redispatches: number; http_5xx: number }> = {};
	for (const r of rows.map((x) => x.split(','))) {
		if (r[i.sv] === 'BACKEND' || r[i.sv] === 'FRONTEND') continue;
		out[`${r[i.px]}/${r[i.sv]}`] = { retries: Number(r[i.retr] || 0), redispatches: Number(r[i.redis] || 0), http_5xx: Number(r[i.e5] || 0) };
	}
	return out;
}

// ---------------------------------------------------------------- the run
async function main() {
	const t0 = Date.now();
	const lead = await signedAt(LB, ACCOUNTS.lead);
	log(`load test: ${USERS} users for ${DURATION} s through ${LB}; stops ${SIGNAL}: db${STOP_DB}, app1, worker1`);
	if (process.env.CLUSTER_IDLE_CHECK !== '0') startIdleServers();
	rmSync(LOAD_OUT, { force: true }); // never read an earlier run's figures
	const load = spawn(
		process.execPath,
		[join(ROOT, 'node_modules/tsx/dist/cli.mjs'), 'scripts/load.ts', '--users', String(USERS), '--duration', String(DURATION), '--out', LOAD_OUT],
		{
			cwd: ROOT,
			env: { ...process.env, ENV_FILE, ORIGIN: LB, DB_PORT: String(B + 43) },
			stdio: ['ignore', 'pipe', 'pipe']
		}
	);
	let loadStdout = '';
	load.stdout.on('data', (d) => (loadStdout += d));
	const loadDone = new Promise<number>((r) => load.on('exit', (code) => r(code ?? 1)));
	// the stops are timed from the moment the virtual users start (after the load test's sign-ins)
	let loadStart = 0;
	const started = new Promise<void>((resolveStart) => {
		load.stderr.on('data', (d: Buffer) => {
			process.stderr.write(d);
			if (!loadStart && /users for .* against/.test(String(d))) {
				loadStart = Date.now();
				resolveStart();
			}
		});
		loadDone.then(() => resolveStart());
	});
	await started;
	const atFraction = async (f: number) => {
		const wait = loadStart + f * DURATION * 1000 - Date.now();
		if (wait > 0) await sleep(wait);
	};
	// each stop at its own moment; a node's rejoin may still run when the app server is stopped
	const chaos = Promise.all([
		atFraction(0.1).then(() => stopDb(lead)),
		atFraction(0.4).then(() => stopApp(1)),
		atFraction(0.65).then(() => stopWorker(1))
	]).catch((e) => fail(`stopping and restarting: ${e instanceof Error ? e.message : e}`));
	const loadCode = await loadDone;
	await chaos;
	if (!existsSync(LOAD_OUT)) throw new Error(`the load test wrote no ${LOAD_OUT} (exit ${loadCode})`);
	const L = JSON.parse(readFileSync(LOAD_OUT, 'utf8'));

	// errors: a request in flight on the app server while it was stopped may fail (502/503 from the
	// balancer, or a dropped connection) within the seconds the balancer needs to take it out
	const appStops = stops.filter((s) => s.what.startsWith('app'));
	const inFlight = (L.error_events as { t: number; status: number | null; protocol?: number }[]).filter(
		(e) =>
			(e.status === null || e.status === 502 || e.status === 503 || e.status === 504) &&
			appStops.some((s) => e.t >= s.stoppedAt - 1000 && e.t <= (exitedAt.get(s.what) ?? s.stoppedAt) + 6000)
	);
	const excused = inFlight.length;
	const realErrors = L.errors - excused;
	if (realErrors > 0) fail(`${realErrors} request error(s) besides those in flight on the stopped app server (${JSON.stringify(L.error_samples.slice(0, 5))})`);
	// a submission whose answer was lost with the stopped app server may still have been made: the
	// run then counts one pass fewer than the database holds. That, and only that, is excused for
	// the protocols of those requests; duplicates or discrepancy and audit mismatches never are.
	const lostAnswers = new Set(inFlight.map((e) => e.protocol).filter(Boolean));
	const countProblems = (L.count_problem_samples as string[]).filter((p) => {
		const m = p.match(/^protocol (\d+) \((awaiting_second|in_review)\): (\d) passes submitted, the run saw (\d)$/);
		return !(m && lostAnswers.has(Number(m[1])) && Number(m[3]) === Number(m[4]) + 1);
	});
	const excusedCounts = L.count_problems - countProblems.length;
	if (countProblems.length > 0 || L.count_problems > (L.count_problem_samples as string[]).length)
		fail(`${L.count_problems - excusedCounts} counting problem(s) in the load test: ${JSON.stringify(countProblems.slice(0, 5))}`);
	if (L.protocols === 0) fail('the load test created no protocol');
	if (loadCode !== 0 && L.errors === 0 && L.count_problems === 0) fail(`the load test exited with ${loadCode}`);
	if (stops.length !== 3) fail(`only ${stops.length} of 3 stops happened (the run may be too short: CLUSTER_DURATION)`);

	log('double submissions on both app servers');
	const [first, second] = [await signedAt(LB, ACCOUNTS.scorer), await signedAt(APP(1), ACCOUNTS.scorer2)];
	const doubles = await doubleSubmits(lead, first, second);
	log('mail: every outbox row once');
	const mail = await mailExactlyOnce();
	log('audit figures on every node');
	const audit = await auditOnEveryNode();
	log('sessions across app servers');
	const sessions = await sessionsAcross();
	const idle = process.env.CLUSTER_IDLE_CHECK === '0' ? null : await idleAcross();
	const retries = { transactions: countLogLines(/\[tx\] retry/), gave_up: countLogLines(/\[tx\] gave up/), balancer: await haproxyRetries() };
	const joins: Record<string, number> = {};
	for (const n of [2, 3])
		if (existsSync(join(RUN, `db${n}.first-join`))) joins[`db${n}_first_join_sst_s`] = Number(readFileSync(join(RUN, `db${n}.first-join`), 'utf8'));
	for (const s of stops) joins[`${s.what}_restart_s`] = Math.round(s.restartSeconds * 10) / 10;

	const summary = {
		bench: 'cluster',
		date: new Date().toISOString(),
		machine: { cpus: cpus().length, node: process.version },
		setup: { db_nodes: 3, app_servers: 2, workers: 2, balancer: 'haproxy', users: USERS, duration_s: DURATION, stop_signal: SIGNAL },
		requests: L.requests,
		rps: L.rps,
		protocols: L.protocols,
		verified: L.verified,
		errors: realErrors,
		errors_in_flight_on_stopped_app: excused,
		expected_409: L.expected_409,
		retries,
		counting_checks: {
			load_problems: L.count_problems - excusedCounts,
			load_pass_counts_after_lost_answers: excusedCounts,
			double_submits: doubles.length,
			double_submit_problems: failures.filter((f) => f.startsWith('double submit')).length
		},
		duplicate_emails: mail.duplicates,
		mail,
		rejoin_s: joins,
		stops: stops.map((s) => ({ what: s.what, pid: s.pid, down_s: Math.round(s.downSeconds * 10) / 10, restart_s: Math.round(s.restartSeconds * 10) / 10 })),
		latency_ms: L.latency_ms,
		p95_by_step_ms: L.p95_by_step_ms,
		during_rejoin: rejoinView,
		audit_on_every_node: audit,
		sessions,
		idle_logoff: idle,
		doubles,
		failures,
		total_s: Math.round((Date.now() - t0) / 1000)
	};
	mkdirSync(join(ROOT, '.bench'), { recursive: true });
	writeFileSync(OUT, JSON.stringify(summary, null, 2) + '\n');
	const line = (k: string, v: unknown) => console.log(`  ${k.padEnd(34)} ${typeof v === 'string' ? v : JSON.stringify(v)}`);
	console.log('\nCrosstally on a cluster (3 Galera nodes, 2 app servers, 2 workers, HAProxy):');
	line('requests', `${summary.requests} in ${L.duration_s} s (${summary.rps}/s), ${USERS} users`);
	line('protocols / verified', `${summary.protocols} / ${summary.verified}`);
	line('errors', summary.errors);
	line('in flight on the stopped app', excused);
	line('transaction retries (gave up)', `${retries.transactions} (${retries.gave_up})`);
	line(
		'counting problems',
		`${L.count_problems - excusedCounts}${excusedCounts ? ` (+${excusedCounts} pass counted as not made whose answer was lost in flight)` : ''}`
	);
	line(
		'double submits (app1+app2)',
		`${doubles.length}, each ${doubles.every((d) => d.statuses.join() === '200,409' && d.reconciles === 1) ? 'reconciled once' : 'NOT once'}`
	);
	line(
		'e-mails: due / delivered / caught / dup',
		`${mail.due} / ${mail.delivered} / ${mail.caught} / ${mail.duplicates} (${mail.not_yet_due} reminders not yet due)`
	);
	line('rejoin / restart (s)', joins);
	line('latency p50 / p95 / p99 (ms)', `${L.latency_ms.p50} / ${L.latency_ms.p95} / ${L.latency_ms.p99}`);
	line('sessions across app servers', sessions);
	if (idle) line('idle logoff', idle);
	for (const v of rejoinView) line('during rejoin', v);
	line('written', OUT);
	console.log(
		`BENCH_JSON ${JSON.stringify({ bench: 'cluster', requests: summary.requests, errors: summary.errors, retries: retries.transactions, duplicate_emails: mail.duplicates, latency_ms: L.latency_ms, rejoin_s: joins })}`
	);
	if (failures.length) log(`${failures.length} failure(s):\n  ${failures.join('\n  ')}`);
	await closeRedis().catch(() => undefined);
	await closeDb();
	process.exit(failures.length ? 1 : 0);
}

main().catch(async (e) => {
	console.error(e);
	await closeDb().catch(() => undefined);
	process.exit(1);
});

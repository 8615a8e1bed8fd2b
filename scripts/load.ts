/**
 * `npm run test:load` — 50 concurrent users on loopback for 60 s doing the real work: a lead
 * creates protocols, two scorers enter and submit their passes (sometimes from two tabs at once),
 * reviewers resolve every discrepancy (sometimes two at once on the same one) and sign off.
 * Bounded in time (--duration, default 60 s) and count (--max-protocols, default 2000).
 *
 * Afterwards it checks by counting, for every protocol the run created: passes submitted match
 * the status (1 for awaiting_second, 2 for in_review/verified), no duplicated pass or discrepancy,
 * the discrepancies stored equal the engine's count returned by the second submit, resolutions
 * and sign-offs are all there, and each has its audit events. Any response other than 2xx and
 * the expected 409s of the deliberate races is an error. Prints a summary, a `BENCH_JSON {...}`
 * line and writes .bench/load.json (--out). Exit 1 when anything failed.
 *
 * Needs the app with its services, e.g. `npm start` (demo) or a test stack, and reads
 * $CROSSTALLY_DATA_DIR/crosstally.env (default .data/demo, or .data/test with CROSSTALLY_MODE=test).
 * Sign-ins: one per account (6), shared by the virtual users. Options: --users N (50),
 * --duration S (60), --max-protocols N (2000), --out PATH.
 */
import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { cpus } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { performance } from 'node:perf_hooks';

const ROOT = resolve(import.meta.dirname, '..');
const arg = (name: string, fallback: string) => {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 && process.argv[i + 1] ? process.argv[i + 1] : fallback;
};
const USERS = Number(arg('users', '50'));
const DURATION_S = Number(arg('duration', '60'));
const MAX_PROTOCOLS = Number(arg('max-protocols', '2000'));
const OUT = resolve(ROOT, arg('out', '.bench/load.json'));
const DATA_DIR = process.env.CROSSTALLY_DATA_DIR ?? join(ROOT, process.env.CROSSTALLY_MODE === 'test' ? '.data/test' : '.data/demo');
const ENV_FILE = process.env.ENV_FILE ?? join(DATA_DIR, 'crosstally.env');
if (!existsSync(ENV_FILE)) {
	console.error(`test:load: no ${ENV_FILE}; start the app first (npm start, or CROSSTALLY_MODE=test …)`);
	process.exit(2);
}
process.loadEnvFile(ENV_FILE); // variables already set win

const { Client, ACCOUNTS } = await import('../tests/helpers/http');
const { select, selectOne, closeDb } = await import('../src/lib/server/db');
const { closeRedis } = await import('../src/lib/server/redis');
const { correctScores, userId } = await import('../tests/helpers/workflow');
type Scores = Awaited<ReturnType<typeof correctScores>>;
type AnyClient = InstanceType<typeof Client>;

const log = (s: string) => console.error(`[test:load] ${s}`);
const RUN = `LD${Date.now().toString(36).toUpperCase()}`;
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };

// ------------------------------------------------------------------ measuring
const samples: number[] = [];
const byStep: Record<string, number[]> = {};
const statuses: Record<string, number> = {};
const errors: string[] = [];
/** When each failed request ended (for a run that stops servers on purpose: scripts/cluster/run.ts). */
const errorEvents: { t: number; step: string; status: number | null; protocol?: number }[] = [];
const protocolOf = (path: string) => Number(path.match(/\/protocols\/(\d+)/)?.[1]) || undefined;
let expected409 = 0;
/** exceptions that only follow from a failed request already counted in errors */
const followOn: string[] = [];

async function timed(step: string, c: AnyClient, path: string, init: Parameters<AnyClient['request']>[1] = {}, allow409 = false): Promise<Response> {
	const t0 = performance.now();
	let res: Response;
	try {
		res = await c.request(path, init);
	} catch (e) {
		// fetch() says only "fetch failed"; the reason (a reset, a closed keep-alive socket, a timeout) is its cause
		const cause =
			e instanceof Error && e.cause
				? ` (${(e.cause as { code?: string; message?: string }).code ?? ''} ${(e.cause as { message?: string }).message ?? ''})`.replace('( ', '(')
				: '';
		errors.push(`${step} ${path}: ${e instanceof Error ? e.message : e}${cause} after ${Math.round(performance.now() - t0)} ms`);
		errorEvents.push({ t: Date.now(), step, status: null, protocol: protocolOf(path) });
		throw e;
	}
	const ms = performance.now() - t0;
	samples.push(ms);
	(byStep[step] ??= []).push(ms);
	statuses[res.status] = (statuses[res.status] ?? 0) + 1;
	if (res.status === 409 && allow409) expected409++;
	else if (res.status >= 300 && !(res.status === 200 || res.status === 303)) {
		errors.push(`${step} ${init.method ?? 'GET'} ${path}: ${res.status} ${(await res.clone().text()).slice(0, 200)}`);
		errorEvents.push({ t: Date.now(), step, status: res.status, protocol: protocolOf(path) });
	}
	return res;
}

const pct = (xs: number[], p: number) => {
	if (!xs.length) return 0;
	const s = [...xs].sort((a, b) => a - b);
	return Math.round(s[Math.min(s.length - 1, Math.ceil((p / 100) * s.length) - 1)] * 10) / 10;
};

// ------------------------------------------------------------------ the flow
interface Made {
	id: number;
	engineCount: number | null;
	resolved: number;
	signedOff: boolean;
	submits: number;
}
const made: Made[] = [];

async function main() {
	const base = process.env.ORIGIN!;
	if (
		!(await fetch(new URL('/health', base)).then(
			(r) => r.ok,
			() => false
		))
	) {
		log(`the app does not answer at ${base}/health: start it first`);
		process.exit(2);
	}
	const sign = async (email: string) => {
		const c = new Client(base);
		if (!(await c.signIn(email))) throw new Error(`could not sign in as ${email}`);
		return c;
	};
	const [lead, sam, rae, kit, rita] = await Promise.all([
		sign(ACCOUNTS.lead),
		sign(ACCOUNTS.scorer),
		sign(ACCOUNTS.scorer2),
		sign(ACCOUNTS.scorer3),
		sign(ACCOUNTS.reviewer)
	]);
	// a second session per reviewer and scorer: "the other tab"
	const [rita2, lead2] = await Promise.all([sign(ACCOUNTS.reviewer), sign(ACCOUNTS.lead)]);
	const scorers = [
		{ c: sam, id: await userId(ACCOUNTS.scorer) },
		{ c: rae, id: await userId(ACCOUNTS.scorer2) },
		{ c: kit, id: await userId(ACCOUNTS.scorer3) }
	];
	const reviewers = [
		{ c: rita, tab: rita2, id: await userId(ACCOUNTS.reviewer) },
		{ c: lead, tab: lead2, id: await userId(ACCOUNTS.lead) }
	];
	const battery = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'brief-screen'"))!.id;
	let template: Scores | null = null;

	const deadline = Date.now() + DURATION_S * 1000;
	let n = 0;
	log(`${USERS} users for ${DURATION_S} s against ${base} (run ${RUN})`);

	async function enter(
		c: AnyClient,
		id: number,
		scores: Scores,
		twoTabs: boolean
	): Promise<{ status: number; body: { status?: string; discrepancies?: number | null } }> {
		const got = await timed('get pass', c, `/api/v1/protocols/${id}/pass`);
		if (got.status !== 200) throw new Error(`get pass ${id}: ${got.status}`); // counted; ends this protocol
		const pass = await got.json();
		const put = await timed('save draft', c, `/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores, draftVersion: pass.draftVersion } });
		const saved = await put.json();
		const submit = () => timed('submit', c, `/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: saved.draftVersion } }, twoTabs);
		if (!twoTabs) {
			const r = await submit();
			return { status: r.status, body: await r.json() };
		}
		const rs = await Promise.all([submit(), submit()]);
		const ok = rs.filter((r) => r.status === 200);
		if (ok.length !== 1) errors.push(`two tabs submitting protocol ${id}: ${rs.map((r) => r.status).join('/')} (want one 200, one 409)`);
		return { status: ok[0]?.status ?? 409, body: ok[0] ? await ok[0].json() : {} };
	}

	async function user(u: number) {
		while (Date.now() < deadline && n < MAX_PROTOCOLS) {
			const k = n++;
			const seen = errorEvents.length;
			try {
				await oneProtocol(u, k);
			} catch (e) {
				// a failed request already counted (e.g. a 502 body that is not JSON) ends this protocol only
				if (errorEvents.length > seen) followOn.push(`user ${u}: ${e instanceof Error ? e.message : e}`);
				else errors.push(`user ${u}: ${e instanceof Error ? e.stack : e}`);
			}
		}
	}

	async function oneProtocol(u: number, k: number) {
		{
			const [a, b] = [scorers[k % 3], scorers[(k + 1 + (u % 2)) % 3]];
			const rv = reviewers[k % 2];
			const form = {
				code: `${RUN}-${k}`,
				birthDate: '1988-05-17',
				sex: 'F',
				educationYears: '14',
				batteryId: String(battery),
				testDate: '2026-11-20',
				firstScorerId: String(a.id),
				secondScorerId: String(b.id),
				reviewerId: String(rv.id)
			};
			const created = await timed('create', lead, '/protocols/new', {
				method: 'POST',
				form,
				headers: { 'x-sveltekit-action': 'true', accept: 'application/json' }
			});
			const cb = await created.json();
			const id = Number(String(cb.location ?? '').match(/\/protocols\/(\d+)/)?.[1]);
			if (!id) {
				errors.push(`create: ${JSON.stringify(cb).slice(0, 200)}`);
				return;
			}
			const m: Made = { id, engineCount: null, resolved: 0, signedOff: false, submits: 0 };
			made.push(m);
			template ??= await correctScores(id, RAWS);
			const first: Scores = JSON.parse(JSON.stringify(template));
			const second: Scores = JSON.parse(JSON.stringify(template));
			// the second scorer's habits: a swapped digit, a sign not reversed, sometimes both
			if (k % 3 !== 0) second['word-recall'].standard = first['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2');
			if (k % 2 === 0) second['speeded-match'].z = String(-Number(first['speeded-match'].z));
			const r1 = await enter(a.c, id, first, false);
			if (r1.status !== 200) return;
			m.submits++;
			const r2 = await enter(b.c, id, second, k % 5 === 0);
			if (r2.status !== 200) return;
			m.submits++;
			m.engineCount = Number(r2.body.discrepancies);
			await timed('review page', rv.c, `/protocols/${id}/review`, { headers: { accept: 'text/html' } });
			const ds = await select<{ id: number; lock_version: number }>(
				'SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id AND resolved_at IS NULL',
				{ id }
			);
			for (const [i, d] of ds.entries()) {
				const body = { choice: 'recomputed', lockVersion: d.lock_version };
				if (i === 0 && k % 4 === 0) {
					// two reviewer tabs at once on the same discrepancy
					const rs = await Promise.all([
						timed('resolve', rv.c, `/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: body }, true),
						timed('resolve', rv.tab, `/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: body }, true)
					]);
					const codes = rs.map((r) => r.status).sort();
					if (codes.join() !== '200,409') errors.push(`racing reviewers on discrepancy ${d.id}: ${codes.join('/')}`);
					else m.resolved++;
				} else if ((await timed('resolve', rv.c, `/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: body })).status === 200) m.resolved++;
			}
			const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
			const so = await timed('sign off', rv.c, `/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: lock } });
			m.signedOff = so.status === 200;
			await timed('worklist', a.c, '/api/v1/worklist');
		}
	}

	const t0 = performance.now();
	await Promise.all(Array.from({ length: USERS }, (_, u) => user(u).catch((e) => errors.push(`user ${u}: ${e instanceof Error ? e.stack : e}`))));
	const seconds = (performance.now() - t0) / 1000;

	// ---------------------------------------------------------------- verification by counting
	const ids = made.map((m) => m.id);
	const problems: string[] = [];
	if (ids.length) {
		const prot = new Map(
			(await select<{ id: number; status: string }>('SELECT id, status FROM protocols WHERE id IN (:ids)', { ids })).map((p) => [p.id, p.status])
		);
		const passes = await select<{ protocol_id: number; n: number; submitted: number; dup: number }>(
			`SELECT protocol_id, COUNT(*) AS n, SUM(status = 'submitted') AS submitted, COUNT(*) - COUNT(DISTINCT which, round) AS dup FROM passes WHERE protocol_id IN (:ids) GROUP BY protocol_id`,
			{ ids }
		).catch(async () =>
			select<{ protocol_id: number; n: number; submitted: number; dup: number }>(
				`SELECT protocol_id, COUNT(*) AS n, SUM(status = 'submitted') AS submitted, COUNT(*) - COUNT(DISTINCT which) AS dup FROM passes WHERE protocol_id IN (:ids) GROUP BY protocol_id`,
				{ ids }
			)
		);
		const pmap = new Map(passes.map((p) => [p.protocol_id, p]));
		const dis = new Map(
			(
				await select<{ protocol_id: number; n: number; open: number; dup: number }>(
					`SELECT protocol_id, COUNT(*) AS n, SUM(resolved_at IS NULL) AS open, COUNT(*) - COUNT(DISTINCT round, position) AS dup FROM discrepancies WHERE protocol_id IN (:ids) GROUP BY protocol_id`,
					{ ids }
				)
			).map((d) => [d.protocol_id, d])
		);
		const aud = new Map(
			(
				await select<{ protocol_id: number; submits: number; resolves: number; signoffs: number }>(
					`SELECT protocol_id, SUM(action LIKE 'submit_%') AS submits, SUM(action = 'resolve') AS resolves, SUM(action = 'sign_off') AS signoffs FROM audit_events WHERE protocol_id IN (:ids) GROUP BY protocol_id`,
					{ ids }
				)
			).map((a) => [a.protocol_id, a])
		);
		for (const m of made) {
			const status = prot.get(m.id);
			const p = pmap.get(m.id);
			const d = dis.get(m.id);
			const a = aud.get(m.id);
			const submitted = Number(p?.submitted ?? 0);
			const want = status === 'draft' ? 0 : status === 'awaiting_second' ? 1 : 2;
			if (submitted !== want || submitted !== m.submits) problems.push(`protocol ${m.id} (${status}): ${submitted} passes submitted, the run saw ${m.submits}`);
			if (Number(p?.dup ?? 0) > 0) problems.push(`protocol ${m.id}: duplicated pass rows`);
			if (m.engineCount !== null && Number(d?.n ?? 0) !== m.engineCount)
				problems.push(`protocol ${m.id}: ${d?.n ?? 0} discrepancies stored, engine said ${m.engineCount}`);
			if (Number(d?.dup ?? 0) > 0) problems.push(`protocol ${m.id}: duplicated discrepancy rows`);
			if (Number(a?.submits ?? 0) !== submitted) problems.push(`protocol ${m.id}: ${a?.submits ?? 0} submit audit events for ${submitted} submitted passes`);
			if (Number(a?.resolves ?? 0) !== m.resolved) problems.push(`protocol ${m.id}: ${a?.resolves ?? 0} resolve audit events for ${m.resolved} resolutions`);
			if (m.signedOff && (status !== 'verified' || Number(a?.signoffs) !== 1 || Number(d?.open ?? 0) !== 0))
				problems.push(`protocol ${m.id}: signed off but ${status}, ${a?.signoffs} sign-off events, ${d?.open} open`);
		}
	}

	const verified = made.filter((m) => m.signedOff).length;
	const summary = {
		bench: 'load',
		run: RUN,
		users: USERS,
		duration_s: Math.round(seconds * 10) / 10,
		requests: samples.length,
		rps: Math.round(samples.length / seconds),
		protocols: made.length,
		verified,
		passes_submitted: made.reduce((s, m) => s + m.submits, 0),
		discrepancies_resolved: made.reduce((s, m) => s + m.resolved, 0),
		expected_409: expected409,
		errors: errors.length,
		count_problems: problems.length,
		latency_ms: { p50: pct(samples, 50), p95: pct(samples, 95), p99: pct(samples, 99), max: pct(samples, 100) },
		p95_by_step_ms: Object.fromEntries(Object.entries(byStep).map(([k, v]) => [k, pct(v, 95)])),
		statuses,
		machine: { cpus: cpus().length, node: process.version }
	};
	log(
		`${summary.requests} requests in ${summary.duration_s} s (${summary.rps}/s) by ${USERS} users: ${made.length} protocols, ${verified} verified, ${summary.passes_submitted} passes, ${summary.discrepancies_resolved} resolutions`
	);
	log(
		`latency p50 ${summary.latency_ms.p50} ms, p95 ${summary.latency_ms.p95} ms, p99 ${summary.latency_ms.p99} ms; ${expected409} expected 409s; ${errors.length} errors; ${problems.length} counting problems`
	);
	for (const e of errors.slice(0, 10)) log(`error: ${e}`);
	for (const p of problems.slice(0, 10)) log(`count: ${p}`);
	mkdirSync(dirname(OUT), { recursive: true });
	writeFileSync(
		OUT,
		JSON.stringify(
			{
				...summary,
				error_samples: errors.slice(0, 50),
				error_events: errorEvents.slice(0, 2000),
				other_errors: errors.length - errorEvents.length,
				follow_on: followOn.slice(0, 50),
				count_problem_samples: problems.slice(0, 50)
			},
			null,
			2
		) + '\n'
	);
	console.log(`BENCH_JSON ${JSON.stringify(summary)}`);
	await closeRedis().catch(() => undefined);
	await closeDb();
	process.exit(errors.length || problems.length || made.length === 0 ? 1 : 0);
}

main().catch(async (e) => {
	console.error(e);
	await closeDb().catch(() => undefined);
	process.exit(1);
});

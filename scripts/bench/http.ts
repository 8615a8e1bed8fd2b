/**
 * `npm run bench:http` — the hot API routes on loopback with autocannon, next to the trivial
 * /health route of the same process (the floor), all with the same signed-in cookie and the same
 * number of connections:
 *   - GET  /api/v1/worklist as a scorer (200 drafts waiting) and as the reviewer (protocols in review);
 *   - PATCH /api/v1/discrepancies/:id: every request resolves a different open discrepancy;
 *   - POST /api/v1/protocols/:id/pass: every request is a different protocol's second submit
 *     (reconciliation, discrepancies, audit summaries and the outbox e-mail in one transaction).
 * p50/p95/p99 come from every response time (not autocannon's buckets). Goals: signed-in /health
 * p95 ≤ 1.5 × anonymous /health p95 (the session check); worklist p95 ≤ 3 × signed-in health p95;
 * resolution ≤ 2 ×; second submit ≤ 4 × (issue 18).
 *
 * Needs the app running on the bench services (npm run bench does all of it). Fixtures are made
 * through the services in this process before timing. Options: --connections N (10),
 * --duration S (8, for GET routes), --submits N (300), --resolutions N (1200), --profiled N (40),
 *   --profile-connections N (1: the in-process profile runs one transaction at a time), --out PATH.
 * At the end, the second submit and the resolution run once more in this process with every SQL
 * statement timed, and a table per transaction shows where the time goes.
 */
import { performance } from 'node:perf_hooks';
import { arg, baseUrl, emit, loadBenchEnv, machine, pct, r2 } from './lib';

// per-statement timing of the in-process profile at the end (src/lib/server/sql-profile.ts)
process.env.CROSSTALLY_SQL_PROFILE = '1';
loadBenchEnv('http');
const { default: autocannon } = await import('autocannon');
const { Client } = await import('../../tests/helpers/http');
const { closeDb } = await import('../../src/lib/server/db');
// the in-process profile's submits wake the mail dispatcher through Redis (mail/wake.ts): that
// connection would keep this process alive after its figures, and the whole bench waiting on it
const { closeRedis } = await import('../../src/lib/server/redis');
const F = await import('./fixtures');
const { submitPass } = await import('../../src/lib/server/protocols/passes');
const { resolveDiscrepancy } = await import('../../src/lib/server/protocols/decisions');
const { startProfile, takeProfile } = await import('../../src/lib/server/sql-profile');

const BASE = baseUrl();
const CONNECTIONS = Number(arg('connections', '10'));
const DURATION = Number(arg('duration', '8'));
const SUBMITS = Number(arg('submits', '300'));
const RESOLUTIONS = Number(arg('resolutions', '1200'));
const SLIPS = 4;
const PROFILED = Number(arg('profiled', '40'));
const PROFILE_CONNECTIONS = Number(arg('profile-connections', '1'));
const log = (s: string) => console.error(`[bench:http] ${s}`);

interface Figures {
	route: string;
	requests: number;
	rps: number;
	p50: number;
	p95: number;
	p99: number;
	non2xx: number;
	errors: number;
	bytes_per_response: number;
}

/**
 * One account's cookies, kept as a browser keeps them: a session cookie the server re-issues (at its
 * refresh point, every minute at most; src/lib/server/session.ts) replaces the old one for the next
 * requests. Without this, every request after the first minute would send a token due for re-issue
 * and take Auth.js's full path (decode, re-encode, Set-Cookie), which no browser does.
 */
interface Jar {
	cookies: Map<string, string>;
	header: string;
}
const jarOf = (cookies: Map<string, string>): Jar => ({ cookies, header: [...cookies].map(([k, v]) => `${k}=${v}`).join('; ') });
function keepCookies(jar: Jar, headers: Record<string, string | string[]>) {
	const set = Object.entries(headers).find(([k]) => k.toLowerCase() === 'set-cookie')?.[1];
	if (!set) return;
	for (const line of Array.isArray(set) ? set : [set]) {
		const [pair, ...attrs] = line.split(';');
		const eq = pair.indexOf('=');
		const name = pair.slice(0, eq).trim();
		const value = pair.slice(eq + 1).trim();
		if (!value || attrs.some((a) => /^\s*max-age=0\s*$/i.test(a))) jar.cookies.delete(name);
		else jar.cookies.set(name, value);
	}
	jar.header = [...jar.cookies].map(([k, v]) => `${k}=${v}`).join('; ');
}
const anonymousJar = (): Jar => jarOf(new Map());

async function signedIn(email: string): Promise<Jar> {
	const c = new Client(BASE);
	if (!(await c.signIn(email, F.PASSWORD))) throw new Error(`could not sign in as ${email} at ${BASE}`);
	return jarOf(new Map(c.cookies));
}

function cannon(
	route: string,
	opts: { path: string; jar: Jar; method?: string; bodies?: Array<{ path: string; body: string }>; amount?: number; duration?: number }
): Promise<Figures> {
	return new Promise((resolve, reject) => {
		const times: number[] = [];
		let next = 0;
		let bytes = 0;
		const jar = opts.jar;
		const headers = { origin: new URL(BASE).origin, 'content-type': 'application/json', 'accept-encoding': 'gzip' };
		const t0 = performance.now();
		const inst = autocannon(
			{
				url: BASE + opts.path,
				connections: CONNECTIONS,
				pipelining: 1,
				headers,
				...(opts.amount ? { amount: opts.amount } : { duration: opts.duration ?? DURATION }),
				requests: [
					{
						method: (opts.method ?? 'GET') as 'GET',
						// the jar's cookies as they are now (every request, anonymous ones too, so all runs build requests alike)
						setupRequest: (req: Record<string, unknown>) => {
							const h = { ...(req.headers as Record<string, string>), ...(jar.header ? { cookie: jar.header } : {}) };
							if (!opts.bodies) return { ...req, headers: h };
							const b = opts.bodies[next++ % opts.bodies.length];
							return { ...req, headers: h, path: b.path, body: b.body };
						},
						onResponse: (_status: number, _body: string, _context: unknown, h: Record<string, string | string[]>) => keepCookies(jar, h)
					}
				]
			},
			(err: Error | null, res: { non2xx: number; errors: number; timeouts: number; requests: { total: number } }) => {
				if (err) return reject(err);
				const seconds = (performance.now() - t0) / 1000;
				resolve({
					route,
					requests: times.length,
					rps: Math.round(times.length / seconds),
					p50: r2(pct(times, 50)),
					p95: r2(pct(times, 95)),
					p99: r2(pct(times, 99)),
					non2xx: res.non2xx,
					errors: res.errors + res.timeouts,
					bytes_per_response: Math.round(bytes / Math.max(1, times.length))
				});
			}
		);
		inst.on('response', (_c: unknown, _status: number, resBytes: number, ms: number) => {
			times.push(ms);
			bytes += resBytes;
		});
	});
}

async function main() {
	const env = machine();
	log(`fixtures: ${SUBMITS} protocols awaiting their second submit, ${Math.ceil(RESOLUTIONS / SLIPS)} in review with ${SLIPS} open discrepancies each`);
	const t = performance.now();
	const ready = await F.makeProtocols({ n: SUBMITS + 20, second: F.EMAILS.second, reconcile: false, prefix: 'BH-S' });
	const reviewed = await F.makeProtocols({ n: Math.ceil((RESOLUTIONS + 20) / SLIPS), second: F.EMAILS.second2, reconcile: true, slips: SLIPS, prefix: 'BH-R' });
	const open = await F.openDiscrepancies(reviewed.map((p) => p.id));
	const profSubmit = await F.makeProtocols({ n: PROFILED, second: F.EMAILS.second, reconcile: false, prefix: 'BH-PS' });
	const profOpen = await F.openDiscrepancies(
		(await F.makeProtocols({ n: Math.ceil(PROFILED / SLIPS) + 1, second: F.EMAILS.second2, reconcile: true, slips: SLIPS, prefix: 'BH-PR' })).map((p) => p.id)
	);
	log(`fixtures made in ${((performance.now() - t) / 1000).toFixed(1)} s (${open.length} open discrepancies)`);
	if (open.length < RESOLUTIONS) log(`only ${open.length} open discrepancies: the resolution run is shorter`);

	const scorer = await signedIn(F.EMAILS.second);
	const reviewer = await signedIn(F.EMAILS.reviewer);

	// warm-up: JIT, connection pool, caches
	await cannon('warm-up', { path: '/health', jar: scorer, duration: 2 });
	await cannon('warm-up', { path: '/api/v1/worklist', jar: scorer, duration: 2 });

	// and a few writes, so that the measured runs do not include loading the route modules
	const W = 20;
	const patchBodies = open.map((d) => ({ path: `/api/v1/discrepancies/${d.id}`, body: JSON.stringify(d.body) }));
	const submitBodies = ready.map((p) => ({ path: `/api/v1/protocols/${p.id}/pass`, body: JSON.stringify({ draftVersion: p.secondDraftVersion }) }));
	await cannon('warm-up', { path: '/api/v1/discrepancies/0', jar: reviewer, method: 'PATCH', amount: W, bodies: patchBodies.slice(0, W) });
	await cannon('warm-up', { path: '/api/v1/protocols/0/pass', jar: scorer, method: 'POST', amount: W, bodies: submitBodies.slice(0, W) });

	const results: Figures[] = [];
	const run = async (f: Promise<Figures>) => {
		const r = await f;
		results.push(r);
		log(
			`${r.route.padEnd(28)} ${String(r.requests).padStart(6)} req  ${String(r.rps).padStart(5)} req/s  p50 ${r.p50} ms  p95 ${r.p95} ms  p99 ${r.p99} ms${r.non2xx ? `  NON-2XX ${r.non2xx}` : ''}`
		);
		return r;
	};
	// The machine is shared: each route is measured right after its own floor run (same cookie,
	// same connections), and its ratio is taken against that adjacent floor.
	const floorRun = (label: string) => run(cannon(`GET /health (floor ${label})`, { path: '/health', jar: scorer, duration: Math.max(3, DURATION / 2) }));
	const goals: Array<{ route: string; p95: number; floor_p95: number; goal: number; ratio: number; met: boolean; floor?: string }> = [];
	// The session check: the same trivial route, anonymous and then with the scorer's cookie (the
	// cookie costs the JWT decode, the session-version check and, near its refresh point, a re-issue).
	const anonymous = await run(cannon('GET /health (anonymous)', { path: '/health', jar: anonymousJar() }));
	const signedInHealth = await run(cannon('GET /health signed in', { path: '/health', jar: scorer }));
	goals.push({
		route: signedInHealth.route,
		p95: signedInHealth.p95,
		floor_p95: anonymous.p95,
		floor: 'anonymous /health',
		goal: 1.5,
		ratio: r2(signedInHealth.p95 / anonymous.p95),
		met: signedInHealth.p95 / anonymous.p95 <= 1.5
	});
	const measured = async (goal: number, label: string, f: () => Promise<Figures>) => {
		const floor = await floorRun(label);
		const r = await run(f());
		goals.push({ route: r.route, p95: r.p95, floor_p95: floor.p95, goal, ratio: r2(r.p95 / floor.p95), met: r.p95 / floor.p95 <= goal });
	};
	await measured(3, 'w1', () => cannon('GET /api/v1/worklist scorer', { path: '/api/v1/worklist', jar: scorer }));
	await measured(3, 'w2', () => cannon('GET /api/v1/worklist reviewer', { path: '/api/v1/worklist', jar: reviewer }));
	await measured(2, 'r', () =>
		cannon('PATCH discrepancy', {
			path: '/api/v1/discrepancies/0',
			jar: reviewer,
			method: 'PATCH',
			amount: patchBodies.length - W,
			bodies: patchBodies.slice(W)
		})
	);
	await measured(4, 's', () =>
		cannon('POST second submit', {
			path: '/api/v1/protocols/0/pass',
			jar: scorer,
			method: 'POST',
			amount: submitBodies.length - W,
			bodies: submitBodies.slice(W)
		})
	);
	const floors = goals.filter((g) => !g.floor);
	const floorP95 = r2(floors.reduce((n, g) => n + g.floor_p95, 0) / floors.length);

	console.log(`\nHTTP on loopback, ${CONNECTIONS} connections, ${env.cores} cores, ${env.date.slice(0, 10)}`);
	console.log(
		`${'route'.padEnd(30)}${'req'.padStart(7)}${'req/s'.padStart(8)}${'p50'.padStart(9)}${'p95'.padStart(9)}${'p99'.padStart(9)}  ratio p95 / adjacent health p95`
	);
	for (const r of results) {
		const g = goals.find((x) => x.route === r.route);
		console.log(
			`${r.route.padEnd(30)}${String(r.requests).padStart(7)}${String(r.rps).padStart(8)}${r.p50.toFixed(1).padStart(9)}${r.p95.toFixed(1).padStart(9)}${r.p99.toFixed(1).padStart(9)}  ${g ? `${g.ratio} (goal ≤ ${g.goal}: ${g.met ? 'met' : 'NOT met'})` : ''}`
		);
	}
	// Where a transaction's time goes: the same services in this process, PROFILE_CONNECTIONS at a time
	// (1 by default: the cost of one transaction, without the queueing the HTTP runs above add), every SQL
	// statement timed (Sequelize's benchmark logging). "added" is the time a statement added with nothing
	// else in flight (sql-profile.ts: pipelined statements overlap); "JS and waiting" is the rest of the
	// wall: the engine, JSON, the pool and the event loop with no statement in flight.
	const profile = async (label: string, jobs: Array<() => Promise<unknown>>) => {
		const walls: number[] = [];
		startProfile();
		let next = 0;
		await Promise.all(
			Array.from({ length: PROFILE_CONNECTIONS }, async () => {
				while (next < jobs.length) {
					const job = jobs[next++];
					const t0 = performance.now();
					await job();
					walls.push(performance.now() - t0);
				}
			})
		);
		const statements = takeProfile();
		const n = walls.length;
		const wall = walls.reduce((a, b) => a + b, 0);
		const inSql = statements.reduce((a, x) => a + x.added_ms, 0);
		console.log(
			`\n${label}: ${n} transactions, ${PROFILE_CONNECTIONS} at a time; wall p50 ${pct(walls, 50).toFixed(1)} ms, p95 ${pct(walls, 95).toFixed(1)} ms, mean ${(wall / n).toFixed(1)} ms; ${(statements.reduce((a, x) => a + x.count, 0) / n).toFixed(1)} statements each`
		);
		console.log(
			`${'statement'.padEnd(34)}${'per tx'.padStart(8)}${'own ms'.padStart(9)}${'p95 ms'.padStart(9)}${'added ms'.padStart(10)}${'share'.padStart(8)}`
		);
		for (const x of statements)
			console.log(
				`${x.statement.padEnd(34)}${(x.count / n).toFixed(1).padStart(8)}${x.mean_ms.toFixed(2).padStart(9)}${x.p95_ms.toFixed(1).padStart(9)}${(x.added_ms / n).toFixed(2).padStart(10)}${`${Math.round((100 * x.added_ms) / wall)} %`.padStart(8)}`
			);
		console.log(
			`${'JS and waiting (wall − added)'.padEnd(34)}${''.padStart(8)}${''.padStart(9)}${''.padStart(9)}${((wall - inSql) / n).toFixed(2).padStart(10)}${`${Math.round((100 * (wall - inSql)) / wall)} %`.padStart(8)}`
		);
		return {
			transactions: n,
			at_a_time: PROFILE_CONNECTIONS,
			wall_mean_ms: r2(wall / n),
			wall_p50_ms: r2(pct(walls, 50)),
			wall_p95_ms: r2(pct(walls, 95)),
			statements_per_tx: r2(statements.reduce((a, x) => a + x.count, 0) / n),
			js_and_waiting_ms_per_tx: r2((wall - inSql) / n),
			statements
		};
	};
	const scorerActor = await F.actor(F.EMAILS.second);
	const reviewerActor = await F.actor(F.EMAILS.reviewer);
	const profiles = {
		submit: await profile(
			'Second submit, per statement (in process)',
			profSubmit.map((p) => () => submitPass(p.id, scorerActor, { draftVersion: p.secondDraftVersion }))
		),
		resolve: await profile(
			'Resolution, per statement (in process)',
			profOpen.slice(0, PROFILED).map((d) => () => resolveDiscrepancy(d.id, reviewerActor, d.body))
		)
	};

	const bad = results.filter((r) => r.non2xx || r.errors);
	if (bad.length) console.log(`\nWARNING: non-2xx or errors in ${bad.map((b) => b.route).join(', ')}`);
	emit('http', { ...env, connections: CONNECTIONS, floor_p95_ms: floorP95, results, goals, profiles, ok: goals.every((g) => g.met) && bad.length === 0 });
}

main()
	.catch((e) => {
		console.error(`[bench:http] ${e instanceof Error ? e.stack : e}`);
		process.exitCode = 1;
	})
	.finally(() => Promise.all([closeDb(), closeRedis()]));

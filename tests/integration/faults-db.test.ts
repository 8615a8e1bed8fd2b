/**
 * MariaDB stopped by its PID while the app runs: pages and API answer 503 with a message (no
 * stack), a submission during the outage changes nothing, and once MariaDB is back the same app
 * process (no restart) serves again and the submission goes through once. Redis and worker faults
 * are in notifications-faults.test.ts.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { Client, signedIn, ACCOUNTS, waitFor } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, getPass } from '../helpers/workflow';
import { LEAK } from '../helpers/leaks';
import { alive, mariadbPid, runDir, startMariadb, stopMariadb } from '../helpers/services';
import { selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
const appPid = () => Number(readFileSync(join(runDir(), 'app.pid'), 'utf8').trim());

let lead: Client, s1: Client, s2: Client, reviewer: Client;
beforeAll(async () => {
	[lead, s1, s2, reviewer] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('reviewer')]);
});
afterAll(async () => {
	await startMariadb(); // whatever happened, leave MariaDB running for the next file
	await closeRedis();
	await closeDb();
}, 90_000);

describe('MariaDB stopped and restarted while the app runs', () => {
	it('answers 503 with a message everywhere, writes nothing, and recovers without a restart', async () => {
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		const first = await correctScores(id, RAWS);
		const second = JSON.parse(JSON.stringify(first));
		second['speeded-match'].z = String(-Number(first['speeded-match'].z));
		expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
		const p2 = await getPass(s2, id);
		const put = await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores: second, draftVersion: p2.body.draftVersion } });
		const { draftVersion } = await put.json();
		await closeDb(); // the test's own pool; reopened on the next query
		const pid = appPid();

		const dbPid = mariadbPid();
		expect(dbPid).not.toBeNull();
		await stopMariadb();
		expect(alive(dbPid)).toBe(false);
		try {
			const probes: [Client, string, RequestInit & { json?: unknown; form?: Record<string, string> }][] = [
				[s1, '/', { headers: { accept: 'text/html' } }],
				[lead, '/protocols', { headers: { accept: 'text/html' } }],
				[lead, `/protocols/${id}`, { headers: { accept: 'text/html' } }],
				[s1, '/api/v1/worklist', {}],
				[lead, '/api/v1/tests', {}],
				[s2, `/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion } }],
				[reviewer, '/api/v1/discrepancies/1', { method: 'PATCH', json: { choice: 'recomputed', lockVersion: 1 } }],
				[lead, '/protocols/new', { method: 'POST', form: { code: 'DOWN-1' }, headers: { accept: 'application/json', 'x-sveltekit-action': 'true' } }]
			];
			for (const [c, path, init] of probes) {
				const r = await c.request(path, init);
				const text = await r.text();
				expect(r.status, `${init.method ?? 'GET'} ${path} while MariaDB is down: ${text.slice(0, 200)}`).toBe(503);
				expect(text, path).toContain('The database cannot be reached right now');
				expect(text, path).not.toMatch(LEAK);
			}
			// sign-in says so plainly; pages that need no database still answer
			const signin = await new Client().action('/signin', { providerId: 'credentials', email: ACCOUNTS.scorer, password: 'crosstally-demo', redirectTo: '/' });
			expect(signin.body.status).toBe(503);
			expect(signin.body.data).toContain('Sign-in is unavailable right now');
			expect((await new Client().get('/signin')).status).toBe(200);
			expect((await new Client().get('/health')).status).toBe(200);
		} finally {
			await startMariadb();
		}

		// the same app process recovers by itself
		await waitFor(async () => (await s1.get('/api/v1/worklist')).status === 200, 20_000, 250);
		expect(appPid()).toBe(pid);
		expect(alive(pid)).toBe(true);
		expect((await s1.request('/', { headers: { accept: 'text/html' } })).status).toBe(200);
		expect(await new Client().signIn(ACCOUNTS.scorer3)).toBe(true);

		// nothing of the refused submission was written: still awaiting the second pass, a draft, no discrepancies
		const p = await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id });
		expect(p!.status).toBe('awaiting_second');
		expect(Number((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id }))!.n)).toBe(0);
		expect(Number((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM outbox WHERE idempotency_key LIKE :k', { k: `review:${id}:%` }))!.n)).toBe(0);
		expect((await getPass(s2, id)).body.status).toBe('draft');

		// and the submission goes through exactly once now
		const ok = await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion } });
		expect(ok.status, await ok.clone().text()).toBe(200);
		expect((await ok.json()).status).toBe('in_review');
		const again = await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion } });
		expect(again.status).toBe(409);
		expect(Number((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id }))!.n)).toBeGreaterThan(0);
	}, 120_000);
});

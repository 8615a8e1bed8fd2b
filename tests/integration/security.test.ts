/**
 * Security against the running app: object-level checks (another scorer's pass, an unassigned
 * protocol, guessed ids, another reviewer's protocol), response headers, cookies (and Secure
 * behind HTTPS, on a second app instance), the origin check, inactivity logoff, no stack trace or
 * SQL for bad input, the app user's grants on the audit trail from every host, and no password
 * or token in any log.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import * as mariadb from 'mariadb';
import { Client, signedIn, ACCOUNTS, DEMO_PASSWORD, caughtMail, waitFor } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit } from '../helpers/workflow';
import { LEAK } from '../helpers/leaks';
import { rootQuery, runDir, startExtraApp } from '../helpers/services';
import { select, selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { config } from '../../src/lib/server/config';

let lead: Client, sam: Client, rae: Client, kit: Client, rita: Client, admin: Client;
beforeAll(async () => {
	[lead, sam, rae, kit, rita, admin] = await Promise.all([
		signedIn('lead'),
		signedIn('scorer'),
		signedIn('scorer2'),
		signedIn('scorer3'),
		signedIn('reviewer'),
		signedIn('admin')
	]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
const png = new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13, 73, 72, 68, 82]);

async function upload(c: Client, id: number, bytes: Uint8Array, name: string) {
	const fd = new FormData();
	fd.append('file', new File([new Uint8Array(bytes)], name));
	const res = await c.request(`/protocols/${id}?/upload`, { method: 'POST', body: fd, headers: { 'x-sveltekit-action': 'true', accept: 'application/json' } });
	return (await res.json()) as { type: string; status?: number; data?: string };
}

/** A protocol in review with a discrepancy list and an attachment. */
async function inReview(first: string, second: string, reviewer: string, firstClient: Client, secondClient: Client) {
	const id = await createViaForm(lead, { first, second, reviewer });
	const a = await correctScores(id, RAWS);
	const b = JSON.parse(JSON.stringify(a));
	b['speeded-match'].z = String(-Number(a['speeded-match'].z));
	expect((await saveAndSubmit(firstClient, id, a)).status).toBe(200);
	expect((await saveAndSubmit(secondClient, id, b)).status).toBe(200);
	expect((await upload(firstClient, id, png, 'scan.png')).type).toBe('success');
	const att = (await selectOne<{ id: number }>('SELECT id FROM attachments WHERE protocol_id = :id', { id }))!.id;
	const ds = await select<{ id: number; lock_version: number }>('SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id', { id });
	const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
	return { id, att, ds, lock };
}

describe('object-level checks', () => {
	// A: Sam and Rae score, Rita reviews.  B: Kit and Rae score, Lee (lead and reviewer) reviews.
	let A: Awaited<ReturnType<typeof inReview>>, B: Awaited<ReturnType<typeof inReview>>;
	beforeAll(async () => {
		A = await inReview(ACCOUNTS.scorer, ACCOUNTS.scorer2, ACCOUNTS.reviewer, sam, rae);
		B = await inReview(ACCOUNTS.scorer3, ACCOUNTS.scorer2, ACCOUNTS.lead, kit, rae);
	}, 60_000);

	it('a scorer reaches nothing of a protocol they are not assigned to (404, the same answer as for no protocol)', async () => {
		const missing = await (await kit.get('/api/v1/protocols/999999/pass')).json();
		for (const [method, path, json] of [
			['GET', `/protocols/${A.id}`],
			['GET', `/protocols/${A.id}/entry`],
			['GET', `/protocols/${A.id}/attachments/${A.att}`],
			['GET', `/api/v1/protocols/${A.id}/pass`],
			['PUT', `/api/v1/protocols/${A.id}/pass`, { scores: {}, draftVersion: 0 }],
			['POST', `/api/v1/protocols/${A.id}/pass`, { draftVersion: 1 }]
		] as const) {
			const r = await kit.request(path, { method, json, headers: { accept: 'text/html' } });
			expect(r.status, `Kit ${method} ${path}`).toBe(404);
			if (path.startsWith('/api/')) expect((await r.json()).message).toBe(missing.message);
		}
		// review, summary, discrepancies and sign-off are closed to the scorer role altogether
		expect((await kit.get(`/protocols/${A.id}/review`)).status).toBe(403);
		expect((await kit.get(`/protocols/${A.id}/summary`)).status).toBe(403);
		expect((await kit.get(`/protocols/${A.id}/summary.csv`)).status).toBe(403);
		expect(
			(await kit.request(`/api/v1/discrepancies/${A.ds[0].id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: A.ds[0].lock_version } })).status
		).toBe(403);
		expect((await kit.request(`/api/v1/protocols/${A.id}/signoff`, { method: 'POST', json: { lockVersion: A.lock } })).status).toBe(403);
	});

	it('a scorer cannot upload to, reassign or reopen a protocol not theirs, and nothing is written', async () => {
		const before = (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM attachments'))!.n;
		const files = () => readdirSync(join(config.dataDir, 'uploads')).length;
		const filesBefore = files();
		const up = await upload(kit, A.id, png, 'mine.png');
		expect(up.status).toBe(404);
		expect((await kit.action(`/protocols/${A.id}?/reassign`, { duty: 'first', userId: '1', reason: 'take it over' })).status).toBe(403);
		expect((await kit.action(`/protocols/${A.id}?/reopen`, { reason: 'take it over' })).status).toBe(403);
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM attachments'))!.n).toBe(before);
		expect(files()).toBe(filesBefore);
	});

	it('an attachment is reachable only through its own protocol', async () => {
		expect((await lead.get(`/protocols/${A.id}/attachments/${A.att}`)).status).toBe(200);
		expect((await lead.get(`/protocols/${B.id}/attachments/${A.att}`)).status).toBe(404);
		expect((await sam.get(`/protocols/${A.id}/attachments/${B.att}`)).status).toBe(404);
		expect((await rita.get(`/protocols/${B.id}/attachments/${B.att}`)).status).toBe(404);
	});

	it("a reviewer cannot read, resolve or sign off another reviewer's protocol", async () => {
		expect((await rita.get(`/protocols/${B.id}`)).status).toBe(404);
		expect((await rita.get(`/protocols/${B.id}/review`)).status).toBe(404);
		expect((await rita.get(`/protocols/${B.id}/summary`)).status).toBe(404);
		expect((await rita.get(`/protocols/${B.id}/summary.csv`)).status).toBe(404);
		const p = await rita.request(`/api/v1/discrepancies/${B.ds[0].id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: B.ds[0].lock_version } });
		expect(p.status).toBe(404);
		expect((await rita.request(`/api/v1/protocols/${B.id}/signoff`, { method: 'POST', json: { lockVersion: B.lock } })).status).toBe(404);
		// a lead who is not the reviewer of A sees it but may not resolve it
		expect((await lead.get(`/protocols/${A.id}/review`)).status).toBe(200);
		expect(
			(await lead.request(`/api/v1/discrepancies/${A.ds[0].id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: A.ds[0].lock_version } })).status
		).toBe(404);
		const untouched = await select<{ resolved_at: Date | null }>('SELECT resolved_at FROM discrepancies WHERE protocol_id IN (:a, :b)', { a: A.id, b: B.id });
		expect(untouched.every((d) => d.resolved_at === null)).toBe(true);
	});

	it('guessing ids: every protocol and discrepancy id answers 404 unless it is assigned', async () => {
		const max = (await selectOne<{ n: number }>('SELECT MAX(id) AS n FROM protocols'))!.n;
		const mine = new Set(
			(
				await select<{ id: number }>(
					'SELECT id FROM protocols WHERE first_scorer_id = (SELECT id FROM users WHERE email = :e) OR second_scorer_id = (SELECT id FROM users WHERE email = :e)',
					{ e: ACCOUNTS.scorer3 }
				)
			).map((r) => r.id)
		);
		for (let id = 1; id <= max + 3; id++) {
			const r = await kit.get(`/api/v1/protocols/${id}/pass`);
			expect(r.status, `Kit GET pass ${id}`).toBe(mine.has(id) ? 200 : 404);
		}
		const dmax = (await selectOne<{ n: number }>('SELECT MAX(id) AS n FROM discrepancies'))!.n;
		const ritas = new Set(
			(
				await select<{ id: number }>(
					'SELECT d.id FROM discrepancies d JOIN protocols p ON p.id = d.protocol_id WHERE p.reviewer_id = (SELECT id FROM users WHERE email = :e)',
					{ e: ACCOUNTS.reviewer }
				)
			).map((r) => r.id)
		);
		for (let id = Math.max(1, dmax - 40); id <= dmax + 3; id++) {
			// a lock version that never matches: probing cannot change anything (her own answer 409)
			const r = await rita.request(`/api/v1/discrepancies/${id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: 999_999 } });
			expect(r.status, `Rita PATCH discrepancy ${id}`).toBe(ritas.has(id) ? 409 : 404);
		}
	});
});

const pageHeaders = (h: Headers, what: string) => {
	expect(h.get('x-frame-options'), what).toBe('DENY');
	expect(h.get('x-content-type-options'), what).toBe('nosniff');
	expect(h.get('referrer-policy'), what).toBe('same-origin');
	const csp = h.get('content-security-policy') ?? '';
	expect(csp, what).toContain("frame-ancestors 'none'");
	return csp;
};

describe('response headers', () => {
	it('pages carry SvelteKit’s CSP with nonces or hashes, frame denial, nosniff and a referrer policy', async () => {
		for (const [c, path] of [
			[new Client(), '/signin'],
			[lead, '/'],
			[lead, '/protocols'],
			[admin, '/people'],
			[sam, '/this-page-does-not-exist']
		] as const) {
			const r = await c.request(path, { headers: { accept: 'text/html' } });
			expect(r.headers.get('content-type'), path).toContain('text/html');
			const csp = pageHeaders(r.headers, path);
			expect(csp, path).toMatch(/script-src [^;]*'(nonce-[\w+/=]+|sha256-[\w+/=]+)'/);
			expect(csp, path).toContain("object-src 'none'");
			expect(csp, path).not.toMatch(/script-src[^;]*'unsafe-inline'/);
			// the nonce in the header is the one on the page's scripts
			const nonce = /'nonce-([\w+/=]+)'/.exec(csp)?.[1];
			if (nonce) expect(await r.text(), path).toContain(`nonce="${nonce}"`);
		}
	});

	it('an address the API does not have answers 404 in JSON (not the HTML error page), signed in or not', async () => {
		for (const c of [new Client(), lead]) {
			const r = await c.get('/api/v1/protocols/22/no-such-thing');
			expect(r.status).toBe(404);
			expect(r.headers.get('content-type')).toContain('application/json');
			expect(await r.json()).toEqual({ message: 'There is nothing at this address of the API.', code: 'not_found' });
		}
	});

	it('the refusal page of a screen a role may not open (403) may use its own inline style, and nothing else', async () => {
		// the page is answered by the access check itself (src/error.html); its <style> is allowed by
		// its SHA-256 (CSP Level 3, "hash-source": base64 of the digest of the element's text)
		const r = await sam.request('/audit', { headers: { accept: 'text/html' } });
		expect(r.status).toBe(403);
		const body = await r.text();
		const style = /<style>([\s\S]*?)<\/style>/.exec(body)?.[1];
		expect(style, 'the page has its inline style').toBeTruthy();
		const csp = pageHeaders(r.headers, '/audit (403)');
		expect(csp).toContain(`style-src 'sha256-${createHash('sha256').update(style!, 'utf8').digest('base64')}'`);
		expect(csp).toContain("default-src 'none'");
		expect(csp).not.toMatch(/script-src|unsafe-inline/);
	});

	it('API answers and downloads carry a CSP that allows nothing, and the same headers', async () => {
		for (const [c, path] of [
			[new Client(), '/api/v1/me'],
			[sam, '/api/v1/worklist'],
			[lead, '/api/v1/tests'],
			[lead, '/catalog/export/tests']
		] as const) {
			const r = await c.get(path);
			const csp = pageHeaders(r.headers, path);
			expect(csp, path).toContain("default-src 'none'");
			expect(r.headers.get('cache-control'), path).toMatch(/no-store/);
		}
	});

	it('a scan may be framed by our own pages only, with a CSP of its own', async () => {
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		expect((await upload(sam, id, png, 'scan.png')).type).toBe('success');
		const att = (await selectOne<{ id: number }>('SELECT id FROM attachments WHERE protocol_id = :id', { id }))!.id;
		const r = await sam.get(`/protocols/${id}/attachments/${att}`);
		expect(r.headers.get('x-frame-options')).toBe('SAMEORIGIN');
		expect(r.headers.get('content-security-policy')).toContain("frame-ancestors 'self'");
		expect(r.headers.get('x-content-type-options')).toBe('nosniff');
	});
});

describe('cookies and the origin check', () => {
	it('the session cookie is HttpOnly and SameSite=Lax; no cookie is readable by scripts', async () => {
		const c = new Client();
		expect(await c.signIn(ACCOUNTS.scorer)).toBe(true);
		const session = c.lastSetCookies.find((x) => /session-token=/.test(x));
		expect(session).toBeDefined();
		expect(session).toMatch(/;\s*HttpOnly/i);
		expect(session).toMatch(/;\s*SameSite=Lax/i);
		expect(session).toMatch(/;\s*Path=\//i);
		for (const x of c.lastSetCookies) expect(x, x.split(';')[0]).toMatch(/;\s*HttpOnly/i);
	});

	it('SvelteKit refuses cross-site form posts (sign-in, actions, text/plain to the API) and answers no CORS pre-flight', async () => {
		const evil = new Client(undefined, 'https://evil.example');
		evil.cookies = new Map(lead.cookies);
		const signin = await evil.request('/signin', { method: 'POST', form: { providerId: 'credentials', email: ACCOUNTS.lead, password: DEMO_PASSWORD } });
		expect(signin.status).toBe(403);
		expect(await signin.text()).toMatch(/Cross-site POST form submissions are forbidden/);
		const before = (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM protocols'))!.n;
		const action = await evil.request('/protocols/new', { method: 'POST', form: { code: 'CSRF-1' } });
		expect(action.status).toBe(403);
		const plain = await evil.request('/api/v1/tests', { method: 'POST', body: '{"code":"csrf"}', headers: { 'content-type': 'text/plain' } });
		expect(plain.status).toBe(403);
		const pre = await evil.request('/api/v1/tests', {
			method: 'OPTIONS',
			headers: { 'access-control-request-method': 'POST', 'access-control-request-headers': 'content-type' }
		});
		expect(pre.headers.get('access-control-allow-origin')).toBeNull();
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM protocols'))!.n).toBe(before);
	});
});

describe('behind HTTPS, and inactivity logoff (a second app instance: ORIGIN https://…, SESSION_IDLE_MINUTES=0.05)', () => {
	const port = Number(process.env.PORT ?? 3010) + 100;
	let app: Awaited<ReturnType<typeof startExtraApp>>;
	const client = () => new Client(`http://127.0.0.1:${port}`, `https://localhost:${port}`);
	beforeAll(async () => {
		app = await startExtraApp(port, { ORIGIN: `https://localhost:${port}`, SESSION_IDLE_MINUTES: '0.05' });
	}, 30_000);
	afterAll(async () => {
		await app?.stop();
	});
	const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

	it('cookies are Secure (and __Secure- prefixed) and HSTS is sent when the origin is https', async () => {
		const c = client();
		expect(await c.signIn(ACCOUNTS.scorer)).toBe(true);
		const session = c.lastSetCookies.find((x) => /session-token=/.test(x))!;
		expect(session).toMatch(/^__Secure-authjs\.session-token=/);
		expect(session).toMatch(/;\s*Secure/i);
		expect(session).toMatch(/;\s*HttpOnly/i);
		expect(session).toMatch(/;\s*SameSite=Lax/i);
		const r = await c.get('/api/v1/me');
		expect(r.status).toBe(200);
		expect(r.headers.get('strict-transport-security')).toMatch(/max-age=\d+/);
	});

	it('a session used within the idle period stays; one left idle longer is signed out (API 401, pages to sign-in)', async () => {
		const c = client();
		expect(await c.signIn(ACCOUNTS.scorer)).toBe(true);
		// idle limit 3 s: requests every 1.5 s for 6 s keep the session alive (the cookie slides)
		for (let i = 0; i < 4; i++) {
			await sleep(1_500);
			expect((await c.get('/api/v1/me')).status, `request ${i + 1} after 1.5 s`).toBe(200);
		}
		await sleep(4_000);
		expect((await c.get('/api/v1/me')).status).toBe(401);
		const page = await c.get('/protocols');
		expect(page.status).toBe(303);
		expect(page.headers.get('location')).toMatch(/^\/signin/);
	}, 30_000);
});

describe('bad input never shows a stack trace or SQL', () => {
	const ids = ["1'", '1;DROP TABLE users', '-1', '0', '1e3', '99999999999999999999', '%00', '..%2F..%2Fetc%2Fpasswd', 'NaN', '0x10', '%27%20OR%201%3D1'];
	it('odd ids in every parameterised route answer 4xx with a message', async () => {
		for (const id of ids) {
			for (const [c, path] of [
				[sam, `/api/v1/protocols/${id}/pass`],
				[rita, `/protocols/${id}/review`],
				[lead, `/protocols/${id}`],
				[lead, `/protocols/${id}/summary.csv`],
				[lead, `/protocols/${id}/attachments/${id}`],
				[lead, `/api/v1/tests/${id}`],
				[lead, `/api/v1/batteries/${id}`],
				[lead, `/api/v1/norm-sets/${id}`],
				[lead, `/api/v1/audit/${id}`],
				[lead, `/catalog/export/${id}`],
				[lead, `/catalog/tests/${id}`],
				[admin, `/mailbox/${id}`],
				[new Client(), `/set-password/${id}`]
			] as const) {
				const r = await c.get(path);
				const body = await r.text();
				expect(r.status, `${path}: ${body.slice(0, 200)}`).toBeLessThan(500);
				expect(body, path).not.toMatch(LEAK);
			}
		}
	});

	it('malformed bodies and content types on every write route answer 4xx with a message', async () => {
		const bodies: [string, string][] = [
			['application/json', '{'],
			['application/json', 'null'],
			['application/json', '[]'],
			['application/json', '"x"'],
			['application/json', '{"scores":{"a":{"raw":{"$gt":1}}},"draftVersion":"1 OR 1=1"}'],
			['application/json', '{"__proto__":{"admin":true},"lockVersion":1e308}'],
			['application/octet-stream', '\u0000\u0001\u0002'],
			['multipart/form-data; boundary=x', '--x\r\nbroken'],
			['application/x-www-form-urlencoded', 'a=%E0%A4%A'],
			['application/json; charset=utf-16', '\uFEFF{}']
		];
		const routes: [Client, string, string][] = [
			[sam, 'PUT', '/api/v1/protocols/1/pass'],
			[sam, 'POST', '/api/v1/protocols/1/pass'],
			[rita, 'PATCH', '/api/v1/discrepancies/1'],
			[rita, 'POST', '/api/v1/protocols/1/signoff'],
			[lead, 'POST', '/api/v1/tests'],
			[lead, 'PUT', '/api/v1/tests/word-recall'],
			[lead, 'POST', '/api/v1/batteries'],
			[lead, 'PUT', '/api/v1/batteries/1'],
			[lead, 'POST', '/api/v1/norm-sets'],
			[lead, 'PUT', '/api/v1/norm-sets/1'],
			[lead, 'POST', '/api/v1/catalog/import/preview'],
			[lead, 'POST', '/api/v1/catalog/import/confirm'],
			[lead, 'POST', '/protocols/new'],
			[lead, 'POST', '/protocols/1?/upload'],
			[admin, 'POST', '/people?/invite'],
			[new Client(), 'POST', '/signin'],
			[new Client(), 'POST', '/forgot']
		];
		for (const [c, method, path] of routes) {
			for (const [type, body] of bodies) {
				const r = await c.request(path, { method, body, headers: { 'content-type': type } });
				const text = await r.text();
				expect(r.status, `${method} ${path} (${type} ${JSON.stringify(body)}): ${text.slice(0, 200)}`).toBeLessThan(500);
				expect(r.status, `${method} ${path} (${type})`).toBeGreaterThanOrEqual(200);
				expect(text, `${method} ${path}`).not.toMatch(LEAK);
			}
		}
	});
});

describe('the audit trail is append-only for the app user, from every host', () => {
	it('no grant of the app user allows UPDATE or DELETE on audit_events', async () => {
		const hosts = await rootQuery<{ Host: string }>('SELECT Host FROM mysql.user WHERE User = ?', [config.db.user]);
		expect(hosts.map((h) => h.Host).sort()).toEqual(['127.0.0.1', 'localhost']);
		for (const { Host } of hosts) {
			const grants = (await rootQuery<Record<string, string>>(`SHOW GRANTS FOR ?@?`, [config.db.user, Host])).map((g) => Object.values(g)[0]);
			for (const g of grants) {
				// a global or database-wide grant would cover the audit table as well
				if (/ON \*\.\*|ON `[^`]+`\.\*/.test(g)) expect(g, g).toMatch(/^GRANT USAGE ON/);
				if (/`audit_events`/.test(g)) expect(g).toMatch(/^GRANT (SELECT, INSERT|INSERT, SELECT) ON/);
			}
		}
	});

	it('UPDATE and DELETE are refused over TCP and over the socket', async () => {
		const targets = [{ host: '127.0.0.1', port: config.db.port }, { socketPath: join(runDir(), 'mariadb.sock') }];
		for (const t of targets) {
			const conn = await mariadb.createConnection({ ...t, user: config.db.user, password: config.db.password, database: config.db.name });
			try {
				await expect(conn.query("UPDATE audit_events SET action = 'tampered' LIMIT 1")).rejects.toThrow(/UPDATE command denied/);
				await expect(conn.query('DELETE FROM audit_events LIMIT 1')).rejects.toThrow(/DELETE command denied/);
				await expect(conn.query('TRUNCATE TABLE audit_events')).rejects.toThrow(/denied/);
				await expect(conn.query('DROP TABLE audit_events')).rejects.toThrow(/denied/);
				await expect(conn.query('ALTER TABLE audit_events ADD COLUMN x INT')).rejects.toThrow(/denied/);
			} finally {
				await conn.end();
			}
		}
	});
});

describe('passwords and tokens are never logged', () => {
	it('after sign-ins, failed sign-ins, an invitation and a password reset, no log holds the password or a token', async () => {
		await new Client().signIn(ACCOUNTS.scorer, 'wrong-password-Xq7');
		const email = `log.probe.${Date.now()}@demo.crosstally.test`;
		const inv = await admin.action('/people?/invite', { name: 'Log Probe', email, roles: ['scorer'] });
		expect(inv.body.type).toBe('success');
		const r = await new Client().action('/forgot', { email: ACCOUNTS.scorer2 });
		expect(r.status).toBe(200);
		const links = await waitFor(async () => {
			const mails = [...(await caughtMail(email)), ...(await caughtMail(ACCOUNTS.scorer2))];
			const found = mails.flatMap((m) => [...m.text.matchAll(/\/set-password\/([\w-]+)/g)].map((x) => x[1]));
			return found.length >= 2 ? found : null;
		}, 20_000);
		await new Promise((r) => setTimeout(r, 500));
		const logs = readdirSync(runDir()).filter((f) => f.endsWith('.log') && f !== 'mailfake.log');
		expect(logs).toContain('app.log');
		expect(logs).toContain('worker.log');
		for (const f of logs) {
			const text = readFileSync(join(runDir(), f), 'utf8');
			expect(text.includes(DEMO_PASSWORD), `${f} holds the demo password`).toBe(false);
			expect(text.includes('wrong-password-Xq7'), `${f} holds a tried password`).toBe(false);
			for (const token of links) expect(text.includes(token), `${f} holds a set-password token`).toBe(false);
			expect(text, f).not.toMatch(/password_hash|\$2[aby]\$\d\d\$/);
		}
	});
});

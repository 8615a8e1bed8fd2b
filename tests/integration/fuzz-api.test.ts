/**
 * Fuzzing the JSON API routes and the CSV import over HTTP against the running app: generated
 * malformed bodies (random JSON, valid bodies with one value replaced, removed or appended, raw
 * text). No answer may be a 5xx or carry a stack trace or SQL, and nothing may be written by a
 * refused request: rows are counted before and after (writes are allowed only for a 2xx answer).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, getPass } from '../helpers/workflow';
import { LEAK } from '../helpers/leaks';
import { select, selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

const RUNS = Number(process.env.FUZZ_API_RUNS ?? 150);
// outbox is left out: the worker adds reminder rows for open reviews on its own clock
const TABLES = [
	'protocols',
	'passes',
	'discrepancies',
	'audit_events',
	'tests',
	'batteries',
	'battery_tests',
	'norm_sets',
	'norm_groups',
	'attachments',
	'examinees'
];
let total = 0;

async function counts(): Promise<Record<string, number>> {
	const out: Record<string, number> = {};
	for (const t of TABLES) out[t] = Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM \`${t}\``))!.n);
	return out;
}

function mutate(doc: unknown, pathPick: number, replacement: unknown, mode: number): unknown {
	const paths: (string | number)[][] = [];
	const walk = (v: unknown, p: (string | number)[]) => {
		paths.push(p);
		if (Array.isArray(v)) v.slice(0, 20).forEach((x, i) => walk(x, [...p, i]));
		else if (v && typeof v === 'object') for (const [k, x] of Object.entries(v)) walk(x, [...p, k]);
	};
	walk(doc, []);
	const path = paths[pathPick % paths.length];
	if (path.length === 0) return replacement;
	const copy = structuredClone(doc) as Record<string | number, unknown>;
	let parent = copy;
	for (const k of path.slice(0, -1)) parent = parent[k] as Record<string | number, unknown>;
	const last = path[path.length - 1];
	if (mode === 0) delete parent[last];
	else if (mode === 1 && Array.isArray(parent)) parent.push(replacement);
	else parent[last] = replacement;
	return copy;
}

const odd = fc.oneof(
	fc.jsonValue({ maxDepth: 2 }),
	fc.constantFrom(
		null,
		'',
		' ',
		'NaN',
		'1e309',
		'-0',
		'٣',
		'1,5',
		"1' OR '1'='1",
		'<script>x</script>',
		'\u0000',
		'__proto__',
		-1,
		0,
		1e308,
		2 ** 53 + 1,
		2 ** 31,
		[],
		{},
		'x'.repeat(5000)
	),
	fc.string({ maxLength: 12 }),
	fc.double(),
	fc.integer()
);

/** Raw body text: mostly a mutated valid body, sometimes random JSON or plain garbage. */
const bodyFor = (base: unknown) =>
	fc.oneof(
		{ weight: 6, arbitrary: fc.tuple(fc.nat(10_000), odd, fc.nat(2)).map(([p, v, m]) => JSON.stringify(mutate(base, p, v, m)) ?? 'null') },
		{ weight: 2, arbitrary: fc.jsonValue({ maxDepth: 3 }).map((v) => JSON.stringify(v)) },
		{ weight: 1, arbitrary: fc.string({ maxLength: 60 }) }
	);

let lead: Client, s1: Client, s2: Client, reviewer: Client;
const targets: { name: string; client: () => Client; method: string; path: string; base: unknown; mayWrite: boolean }[] = [];

beforeAll(async () => {
	[lead, s1, s2, reviewer] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('reviewer')]);
	const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
	// a draft pass (saving may succeed), a submitted pass (every write refused), a verified protocol
	const draft = await createViaForm(lead, duties);
	const scores = await correctScores(draft, {});
	const dv = (await getPass(s1, draft)).body.draftVersion;
	const locked = await createViaForm(lead, duties);
	await saveAndSubmit(s1, locked, await correctScores(locked, {}));
	const verified = await createViaForm(lead, duties);
	const a = await correctScores(verified, { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 });
	const b = JSON.parse(JSON.stringify(a));
	b['speeded-match'].z = String(-Number(a['speeded-match'].z));
	await saveAndSubmit(s1, verified, a);
	await saveAndSubmit(s2, verified, b);
	const ds = await select<{ id: number; lock_version: number }>('SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id', { id: verified });
	for (const d of ds)
		expect(
			(await reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: d.lock_version } })).status
		).toBe(200);
	const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id: verified }))!.lock_version;
	expect((await reviewer.request(`/api/v1/protocols/${verified}/signoff`, { method: 'POST', json: { lockVersion: lock } })).status).toBe(200);

	const test = await (await lead.get('/api/v1/tests/word-recall')).json();
	const battery = (await (await lead.get('/api/v1/batteries')).json()) as unknown;
	const normSets = (await (await lead.get('/api/v1/norm-sets')).json()) as unknown;
	const first = (x: unknown) => (Array.isArray(x) ? x[0] : ((Object.values(x as object).find(Array.isArray) as unknown[] | undefined)?.[0] ?? x));
	const NH = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,mean,sd,n';
	const csv = `${NH}\nword-recall,a18,216,359,,,,25,4,\nword-recall,a30,360,479,,,,24,4,\n`;
	const setId = Number((first(normSets) as { id?: number })?.id ?? 1);

	targets.push(
		{ name: 'PUT pass (draft)', client: () => s1, method: 'PUT', path: `/api/v1/protocols/${draft}/pass`, base: { scores, draftVersion: dv }, mayWrite: true },
		{
			name: 'PUT pass (submitted)',
			client: () => s1,
			method: 'PUT',
			path: `/api/v1/protocols/${locked}/pass`,
			base: { scores, draftVersion: 2 },
			mayWrite: false
		},
		{ name: 'POST pass (submitted)', client: () => s1, method: 'POST', path: `/api/v1/protocols/${locked}/pass`, base: { draftVersion: 2 }, mayWrite: false },
		{
			name: 'PATCH discrepancy (verified)',
			client: () => reviewer,
			method: 'PATCH',
			path: `/api/v1/discrepancies/${ds[0].id}`,
			base: { choice: 'other', value: '1.00', note: 'fuzz', lockVersion: ds[0].lock_version + 1 },
			mayWrite: false
		},
		{
			name: 'POST signoff (verified)',
			client: () => reviewer,
			method: 'POST',
			path: `/api/v1/protocols/${verified}/signoff`,
			base: { lockVersion: lock + 1 },
			mayWrite: false
		},
		{ name: 'POST tests', client: () => lead, method: 'POST', path: '/api/v1/tests', base: { ...test, code: 'word-recall' }, mayWrite: true },
		{ name: 'PUT tests/[code]', client: () => lead, method: 'PUT', path: '/api/v1/tests/word-recall', base: test, mayWrite: true },
		{ name: 'POST batteries', client: () => lead, method: 'POST', path: '/api/v1/batteries', base: first(battery), mayWrite: true },
		{ name: 'POST norm-sets', client: () => lead, method: 'POST', path: '/api/v1/norm-sets', base: first(normSets), mayWrite: true },
		{ name: 'POST import preview', client: () => lead, method: 'POST', path: '/api/v1/catalog/import/preview', base: { kind: 'norms', csv }, mayWrite: true },
		{
			name: 'POST import confirm',
			client: () => lead,
			method: 'POST',
			path: '/api/v1/catalog/import/confirm',
			base: { kind: 'norms', csv, target: { mode: 'existing', id: setId } },
			mayWrite: true
		}
	);
}, 120_000);

afterAll(async () => {
	console.log(`[fuzz-api] ${total} generated requests against ${targets.length} routes`);
	await closeRedis();
	await closeDb();
});

describe('JSON API routes under generated malformed bodies', () => {
	it.each(Array.from({ length: 11 }, (_, i) => [i]))(
		'route %i: no 5xx, no stack or SQL, nothing written unless accepted',
		async (i) => {
			const t = targets[i];
			const before = await counts();
			let accepted = 0;
			await fc.assert(
				fc.asyncProperty(bodyFor(t.base), async (body) => {
					const r = await t.client().request(t.path, { method: t.method, body, headers: { 'content-type': 'application/json' } });
					const text = await r.text();
					total++;
					expect(r.status, `${t.name} ${body.slice(0, 300)} → ${text.slice(0, 300)}`).toBeLessThan(500);
					expect(text, t.name).not.toMatch(LEAK);
					if (r.status >= 400) expect(() => JSON.parse(text).message, `${t.name}: a JSON message`).not.toThrow();
					if (r.status < 300) accepted++;
				}),
				{ numRuns: RUNS }
			);
			const after = await counts();
			if (!t.mayWrite) expect(accepted, `${t.name} accepted a malformed body`).toBe(0);
			const changed = Object.keys(before)
				.filter((k) => before[k] !== after[k])
				.map((k) => `${k} ${before[k]}→${after[k]}`);
			if (accepted === 0) expect(changed, `${t.name}: rows written by refused requests`).toEqual([]);
			else {
				// accepted bodies write; the protocol tables stay untouched by the catalog routes and vice versa
				for (const k of ['protocols', 'discrepancies', 'attachments', 'examinees']) expect(after[k], `${t.name}: ${k}`).toBe(before[k]);
			}
		},
		120_000
	);
});

describe('uploads: type by content, size limits, empty files, names with path characters', () => {
	async function upload(c: Client, id: number, bytes: Uint8Array, name: string) {
		const fd = new FormData();
		fd.append('file', new File([new Uint8Array(bytes)], name));
		const res = await c.request(`/protocols/${id}?/upload`, {
			method: 'POST',
			body: fd,
			headers: { 'x-sveltekit-action': 'true', accept: 'application/json' }
		});
		const text = await res.text();
		expect(text).not.toMatch(LEAK);
		return { http: res.status, ...(JSON.parse(text) as { type: string; status?: number; data?: string }) };
	}
	const pdf = (n: number) => {
		const b = new Uint8Array(n);
		b.set(new TextEncoder().encode('%PDF-1.7\n'));
		return b;
	};

	it('refuses what it must, writes nothing for a refusal, and cleans names', async () => {
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		const before = await counts();
		expect((await upload(s1, id, new TextEncoder().encode('<html><script>alert(1)</script></html>'), 'scan.png')).status).toBe(415);
		expect((await upload(s1, id, new TextEncoder().encode('MZ\x90\x00 executable'), 'scan.pdf')).status).toBe(415);
		expect((await upload(s1, id, new Uint8Array(0), 'empty.pdf')).status).toBe(400);
		expect((await upload(s1, id, pdf(10 * 1024 * 1024 + 1), 'big.pdf')).status).toBe(413);
		// beyond BODY_SIZE_LIMIT (25M) the adapter refuses the body before the action runs
		const huge = await upload(s1, id, pdf(26 * 1024 * 1024), 'huge.pdf').catch(() => ({ http: 413, type: 'error' }));
		expect(huge.http).toBe(413);
		expect(await counts()).toEqual(before);
		const ok = await upload(s1, id, pdf(2048), '..\\..\\windows\\system32\\scan<1>.pdf');
		expect(ok.type).toBe('success');
		const row = await selectOne<{ filename: string; mime: string }>('SELECT filename, mime FROM attachments WHERE protocol_id = :id', { id });
		expect(row!.mime).toBe('application/pdf');
		expect(row!.filename).not.toMatch(/[\\/<>]/);
	}, 60_000);
});

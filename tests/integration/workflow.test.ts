/**
 * The double-entry workflow against the running app and the real MariaDB: creation and separation
 * of duties, the reconciliation transaction, double submits, the blind rule route by route,
 * optimistic locking, sign-off, reopen, and the audit trail.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { Sequelize } from 'sequelize';
import * as mariadb from 'mariadb';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, getPass, userId, type Scores } from '../helpers/workflow';
import { select, selectOne, exec, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { config } from '../../src/lib/server/config';

let lead: Client, s1: Client, s2: Client, s3: Client, reviewer: Client;
beforeAll(async () => {
	[lead, s1, s2, s3, reviewer] = await Promise.all([signedIn('lead'), signedIn('scorer'), signedIn('scorer2'), signedIn('scorer3'), signedIn('reviewer')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const duties = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };

/** Two independent, different entries: the second scorer swaps two digits and forgets to reverse a timed test. */
async function twoEntries(id: number): Promise<{ first: Scores; second: Scores }> {
	const first = await correctScores(id, RAWS);
	const second: Scores = JSON.parse(JSON.stringify(first));
	second['word-recall'].standard = String(first['word-recall'].standard).split('').reverse().join(''); // 116 → 611? keep it a swap:
	second['word-recall'].standard = first['word-recall'].standard!.replace(/^(\d)(\d)(\d)$/, '$1$3$2'); // 116 → 161
	second['speeded-match'].z = String(-Number(first['speeded-match'].z)); // sign not reversed
	return { first, second };
}

describe('creating a protocol', () => {
	it('enforces separation of duties with field messages (and the database refuses it too)', async () => {
		const battery = await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'brief-screen'");
		const sam = (await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :e', { e: ACCOUNTS.scorer }))!.id;
		const rita = (await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :e', { e: ACCOUNTS.reviewer }))!.id;
		const base = { code: 'DUTY-1', birthDate: '1980-01-01', batteryId: String(battery!.id), testDate: '2026-11-01', reviewerId: String(rita) };
		const same = await lead.action('/protocols/new', { ...base, firstScorerId: String(sam), secondScorerId: String(sam) });
		expect(same.body.status).toBe(400);
		expect(same.body.data).toContain('The two scorers must be different people.');
		const rev = await lead.action('/protocols/new', { ...base, firstScorerId: String(sam), secondScorerId: String(rita), reviewerId: String(rita) });
		expect(rev.body.data).toContain('The reviewer cannot be one of the scorers.');
		const notScorer = await lead.action('/protocols/new', { ...base, firstScorerId: String(sam), secondScorerId: String(rita), reviewerId: String(sam) });
		expect(notScorer.body.status).toBe(400);
		const any = await createViaForm(lead, duties);
		await expect(exec(`UPDATE protocols SET reviewer_id = first_scorer_id WHERE id = :id`, { id: any })).rejects.toThrow(/protocols_duties|CONSTRAINT/);
		expect((await selectOne<{ n: number }>("SELECT COUNT(*) AS n FROM examinees WHERE code = 'DUTY-1'"))!.n).toBe(0);
	});

	it('a scorer cannot create protocols; names and birth dates stay hidden from scorers', async () => {
		const r = await s1.action('/protocols/new', { code: 'X' });
		expect(r.status).toBe(403);
		const id = await createViaForm(lead, { ...duties, code: 'NAMED-1' });
		await exec("UPDATE examinees SET name = 'Jonas Example' WHERE code = 'NAMED-1'");
		const page = await (await s1.get(`/protocols/${id}`)).text();
		expect(page).toContain('NAMED-1');
		expect(page).not.toContain('Jonas Example');
		expect(page).not.toContain('1988-05-17');
		const leadPage = await (await lead.get(`/protocols/${id}`)).text();
		expect(leadPage).toContain('Jonas Example');
	});

	it('chooses the norm group by age and shows age as years;months', async () => {
		const id = await createViaForm(lead, { ...duties, birthDate: '1990-06-15', testDate: '2026-11-20' });
		const p = await selectOne<{ age_text: string; age_months: number }>('SELECT age_text, age_months FROM protocols WHERE id = :id', { id });
		expect(p).toEqual({ age_text: '36;5;5', age_months: 36 * 12 + 5 });
		const groups = await select<{ group_code: string }>(
			'SELECT ng.group_code FROM protocol_tests pt JOIN norm_groups ng ON ng.id = pt.norm_group_id WHERE pt.protocol_id = :id',
			{ id }
		);
		expect(groups.length).toBe(5);
		expect(groups.every((g) => g.group_code.startsWith('a30'))).toBe(true);
	});
});

describe('the blind rule, route by route', () => {
	it('neither scorer can see the other pass before the second pass is submitted', async () => {
		const id = await createViaForm(lead, duties);
		const first = await correctScores(id, { ...RAWS, 'word-recall': 31 });
		first['switch-rule'].raw = '47'; // a marker value only the first pass holds
		const r1 = await saveAndSubmit(s1, id, first);
		expect(r1.body.status).toBe('awaiting_second');
		// the second scorer drafts a marker of their own
		const p2 = await getPass(s2, id);
		expect(p2.body.scores).toEqual({});
		expect(p2.body.which).toBe('second');
		await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores: { 'word-recall': { raw: '33' } }, draftVersion: p2.body.draftVersion } });

		const probes = [
			`/protocols/${id}`,
			`/protocols/${id}/entry`,
			`/protocols/${id}/review`,
			`/protocols/${id}/summary`,
			`/protocols/${id}/summary.csv`,
			`/api/v1/protocols/${id}/pass`,
			`/api/v1/worklist`,
			`/`,
			`/protocols`
		];
		for (const path of probes) {
			const a = await s2.get(path);
			const text = await a.text();
			expect(text, `second scorer GET ${path}`).not.toMatch(/"raw":"47"|>47<|\b31\b.*word-recall/);
			expect(a.status, path).toBeLessThan(500);
			const b = await s1.get(path);
			const t1 = await b.text();
			expect(t1, `first scorer GET ${path}`).not.toContain('"33"');
		}
		// the review and summary are closed to scorers whatever the state
		expect((await s2.get(`/protocols/${id}/review`)).status).toBe(403);
		expect((await s2.request(`/api/v1/discrepancies/1`, { method: 'PATCH', json: { choice: 'first', lockVersion: 1 } })).status).toBe(403);
		// guessing ids: another scorer's protocol answers 404, never its data
		const other = await createViaForm(lead, { first: ACCOUNTS.scorer3, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		expect((await s1.get(`/api/v1/protocols/${other}/pass`)).status).toBe(404);
		expect((await s1.get(`/protocols/${other}`)).status).toBe(404);
		expect((await s1.request(`/api/v1/protocols/${other}/pass`, { method: 'PUT', json: { scores: {}, draftVersion: 0 } })).status).toBe(404);
	});

	it('the second pass cannot be submitted before the first', async () => {
		const id = await createViaForm(lead, duties);
		const r = await saveAndSubmit(s2, id, await correctScores(id, RAWS));
		expect(r.status).toBe(409);
		expect(r.body.message).toContain('The first pass has not been submitted yet');
		expect((await getPass(s2, id)).body.status).toBe('draft');
	});
});

describe('reconciliation on the second submit', () => {
	it('stores the discrepancies, moves to in_review and writes the outbox row in one transaction', async () => {
		const id = await createViaForm(lead, duties);
		const { first, second } = await twoEntries(id);
		expect((await saveAndSubmit(s1, id, first)).status).toBe(200);
		const r = await saveAndSubmit(s2, id, second);
		expect(r.status).toBe(200);
		expect(r.body).toMatchObject({ which: 'second', status: 'in_review', discrepancies: 2 });
		const ds = await select<{ test_code: string; field: string; kind: string; pass: string }>(
			'SELECT test_code, field, kind, pass FROM discrepancies WHERE protocol_id = :id ORDER BY position',
			{ id }
		);
		expect(ds).toEqual([
			{ test_code: 'speeded-match', field: 'z', kind: 'sign_flip', pass: 'second' },
			{ test_code: 'word-recall', field: 'standard', kind: 'transposition', pass: 'second' }
		]);
		const outbox = await select<{ kind: string }>(`SELECT kind FROM outbox WHERE JSON_VALUE(payload, '$.protocolId') = :id`, { id });
		expect(outbox.map((o) => o.kind)).toContain('review_first');
		const actions = (await select<{ action: string }>('SELECT action FROM audit_events WHERE protocol_id = :id ORDER BY id', { id })).map((a) => a.action);
		expect(actions).toEqual(expect.arrayContaining(['create', 'submit_first', 'status', 'submit_second', 'reconcile']));
	});

	it('a double submit (two tabs at once) reconciles once; the loser gets a clear conflict', async () => {
		const id = await createViaForm(lead, duties);
		const { first, second } = await twoEntries(id);
		await saveAndSubmit(s1, id, first);
		const pass = await getPass(s2, id);
		const put = await (
			await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores: second, draftVersion: pass.body.draftVersion } })
		).json();
		const tabs = await Promise.all(
			[0, 1, 2].map(() => s2.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: put.draftVersion } }))
		);
		const statuses = tabs.map((t) => t.status).sort();
		expect(statuses).toEqual([200, 409, 409]);
		const loser = await tabs.find((t) => t.status === 409)!.json();
		expect(loser.code).toBe('already_submitted');
		expect(loser.message).toContain('already submitted');
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id }))!.n).toBe(2);
		expect(
			(await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM outbox WHERE kind = 'review_first' AND JSON_VALUE(payload, '$.protocolId') = :id`, { id }))!.n
		).toBe(1);
	});

	it('a failure inside the transaction rolls everything back and says so', async () => {
		const root = new Sequelize(config.db.name, 'root', '', {
			dialect: 'mariadb',
			dialectModule: mariadb,
			logging: false,
			dialectOptions: { socketPath: process.env.MIGRATE_SOCKET }
		});
		const id = await createViaForm(lead, duties);
		const { first, second } = await twoEntries(id);
		await saveAndSubmit(s1, id, first);
		await root.query(`ALTER TABLE discrepancies ADD CONSTRAINT test_fault CHECK (protocol_id <> ${id})`);
		try {
			const r = await saveAndSubmit(s2, id, second);
			expect(r.status).toBe(500);
			expect(r.body.message).toContain('nothing was changed');
			expect(JSON.stringify(r.body)).not.toMatch(/CONSTRAINT|SQL|at \//);
		} finally {
			await root.query('ALTER TABLE discrepancies DROP CONSTRAINT test_fault');
			await root.close();
		}
		const p = await selectOne<{ status: string }>('SELECT status FROM protocols WHERE id = :id', { id });
		expect(p!.status).toBe('awaiting_second');
		expect((await getPass(s2, id)).body.status).toBe('draft');
		expect((await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM discrepancies WHERE protocol_id = :id', { id }))!.n).toBe(0);
		expect((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM audit_events WHERE protocol_id = :id AND action = 'reconcile'`, { id }))!.n).toBe(0);
		// and once the fault is gone, the same submit goes through
		const pass = await getPass(s2, id);
		const retry = await s2.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: pass.body.draftVersion } });
		expect(retry.status).toBe(200);
	});
});

describe('review, sign-off and reopen', () => {
	async function inReview() {
		const id = await createViaForm(lead, duties);
		const { first, second } = await twoEntries(id);
		await saveAndSubmit(s1, id, first);
		await saveAndSubmit(s2, id, second);
		const ds = await select<{ id: number; lock_version: number; field: string; expected: string | null }>(
			'SELECT id, lock_version, field, expected FROM discrepancies WHERE protocol_id = :id ORDER BY position',
			{ id }
		);
		return { id, ds, first };
	}

	it('a note is required for another value and for anything but the recomputed value', async () => {
		const { ds } = await inReview();
		const patch = (body: object) => reviewer.request(`/api/v1/discrepancies/${ds[0].id}`, { method: 'PATCH', json: body });
		const other = await patch({ choice: 'other', value: '1.00', lockVersion: ds[0].lock_version });
		expect(other.status).toBe(400);
		expect((await other.json()).message).toContain('Say why you keep another value');
		const second = await patch({ choice: 'second', lockVersion: ds[0].lock_version });
		expect(second.status).toBe(400);
		expect((await second.json()).message).toContain('differs from the recomputed value');
		const impossible = await patch({ choice: 'other', value: '9.99', note: 'typo test', lockVersion: ds[0].lock_version });
		expect(impossible.status).toBe(400);
		const bad = await reviewer.request(`/api/v1/discrepancies/${ds[0].id}`, {
			method: 'PATCH',
			body: 'not json',
			headers: { 'content-type': 'application/json' }
		});
		expect(bad.status).toBe(400);
		const ok = await patch({ choice: 'recomputed', lockVersion: ds[0].lock_version });
		expect(ok.status).toBe(200);
		expect((await ok.json()).open).toBe(1);
	});

	it('optimistic locking: the second of two concurrent resolutions gets a conflict, nothing is overwritten', async () => {
		const { ds } = await inReview();
		const tabA = reviewer;
		const tabB = await signedIn('reviewer');
		const [a, b] = await Promise.all([
			tabA.request(`/api/v1/discrepancies/${ds[1].id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: ds[1].lock_version } }),
			tabB.request(`/api/v1/discrepancies/${ds[1].id}`, {
				method: 'PATCH',
				json: { choice: 'other', value: '117', note: 'from tab B', lockVersion: ds[1].lock_version }
			})
		]);
		expect([a.status, b.status].sort()).toEqual([200, 409]);
		const loser = await (a.status === 409 ? a : b).json();
		expect(loser.message).toContain('Someone else changed this discrepancy first');
		const row = await selectOne<{ lock_version: number }>('SELECT lock_version FROM discrepancies WHERE id = :id', { id: ds[1].id });
		expect(row!.lock_version).toBe(ds[1].lock_version + 1);
	});

	it('sign-off waits for every discrepancy, then locks the protocol; a lead reopens with a reason', async () => {
		const { id, ds } = await inReview();
		const lockOf = async () => (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
		const early = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: await lockOf() } });
		expect(early.status).toBe(409);
		expect((await early.json()).message).toContain('still open');
		for (const d of ds)
			expect(
				(await reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: d.lock_version } })).status
			).toBe(200);
		expect((await s1.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: await lockOf() } })).status).toBe(403);
		const ok = await reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: await lockOf() } });
		expect(ok.status).toBe(200);
		// verified is read-only
		const late = await reviewer.request(`/api/v1/discrepancies/${ds[0].id}`, {
			method: 'PATCH',
			json: { choice: 'first', note: 'late change', lockVersion: ds[0].lock_version + 1 }
		});
		expect(late.status).toBe(409);
		// the summary shows the corrected values
		const csv = await (await reviewer.get(`/protocols/${id}/summary.csv`)).text();
		expect(csv).toContain('Harbour Word Recall');
		expect(csv.split('\r\n').find((l) => l.includes('Harbour Word Recall,'))).toContain(',29,1.07,116,13,61,86,');
		// reopen needs a reason and a lead
		expect((await reviewer.action(`/protocols/${id}?/reopen`, { reason: 'because' })).status).toBe(403);
		const noReason = await lead.action(`/protocols/${id}?/reopen`, { reason: '' });
		expect(noReason.body.data).toContain('Give a reason for reopening');
		const re = await lead.action(`/protocols/${id}?/reopen`, { reason: 'New information about the birth date.' });
		expect(re.body.type).toBe('success');
		const p = await selectOne<{ status: string; round: number }>('SELECT status, round FROM protocols WHERE id = :id', { id });
		expect(p).toEqual({ status: 'in_review', round: 2 });
		const rounds = await select<{ round: number; open: number }>(
			'SELECT round, SUM(resolved_at IS NULL) AS open FROM discrepancies WHERE protocol_id = :id GROUP BY round ORDER BY round',
			{ id }
		);
		expect(rounds.map((r) => [r.round, Number(r.open)])).toEqual([
			[1, 0],
			[2, 2]
		]);
		const history = await (await lead.get(`/protocols/${id}`)).text();
		expect(history).toContain('New information about the birth date.');
	});
});

describe('the audit trail', () => {
	it('is append-only for the app: its database user may not UPDATE or DELETE audit events', async () => {
		await expect(exec("UPDATE audit_events SET action = 'tampered' WHERE id = 1")).rejects.toThrow(/UPDATE command denied/);
		await expect(exec('DELETE FROM audit_events WHERE id = 1')).rejects.toThrow(/DELETE command denied/);
		const { insertId } = await exec("INSERT INTO audit_events (entity, entity_id, action) VALUES ('test', '1', 'probe')");
		expect(insertId).toBeGreaterThan(0);
	});
});

describe('attachments', () => {
	const png = new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13, 73, 72, 68, 82]);
	async function upload(c: Client, id: number, bytes: Uint8Array, name: string) {
		const fd = new FormData();
		fd.append('file', new File([new Uint8Array(bytes)], name));
		const res = await c.request(`/protocols/${id}?/upload`, {
			method: 'POST',
			body: fd,
			headers: { 'x-sveltekit-action': 'true', accept: 'application/json' }
		});
		return (await res.json()) as { type: string; status?: number; data?: string };
	}

	it('checks the type by content, refuses empty files, cleans names, and stores the SHA-256', async () => {
		const id = await createViaForm(lead, duties);
		const text = await upload(s1, id, new TextEncoder().encode('not a scan at all'), 'form.pdf');
		expect(text.status).toBe(415);
		expect(text.data).toContain('Only PDF, PNG and JPEG');
		const empty = await upload(s1, id, new Uint8Array(0), 'empty.png');
		expect(empty.type).toBe('failure');
		const ok = await upload(s1, id, png, '../../etc/passwd\u0000.png');
		expect(ok.type).toBe('success');
		const row = await selectOne<{ filename: string; mime: string; sha256: string; storage_name: string }>(
			'SELECT filename, mime, sha256, storage_name FROM attachments WHERE protocol_id = :id',
			{ id }
		);
		expect(row!.filename).toBe('passwd.png');
		expect(row!.mime).toBe('image/png');
		expect(row!.sha256).toMatch(/^[0-9a-f]{64}$/);
		expect(row!.storage_name).not.toContain('/');
		const a = await selectOne<{ id: number }>('SELECT id FROM attachments WHERE protocol_id = :id', { id });
		const got = await s1.get(`/protocols/${id}/attachments/${a!.id}`);
		expect(got.headers.get('content-type')).toBe('image/png');
		expect(new Uint8Array(await got.arrayBuffer())).toEqual(png);
		expect((await s3.get(`/protocols/${id}/attachments/${a!.id}`)).status).toBe(404);
	});
});

describe('what each worklist and protocol list shows (issue 18: the same answers whatever the query plan)', () => {
	// Three fresh accounts (each scorer and reviewer), seven protocols in every state, and the times
	// the lists sort by written by hand, so every answer below is known in full, in order.
	it('the worklist of each role and the protocol list of each role, item by item', async () => {
		const { worklist, listProtocols } = await import('../../src/lib/server/protocols/service');
		const tag = Date.now().toString(36).toUpperCase();
		const person = async (label: string) => {
			const email = `${label.toLowerCase()}.${tag.toLowerCase()}@demo.crosstally.test`;
			const name = `${label} ${tag}`;
			const { insertId } = await exec(
				`INSERT INTO users (email, name, password_hash, roles) SELECT :email, :name, password_hash, 'scorer,reviewer' FROM users WHERE email = :sam`,
				{ email, name, sam: ACCOUNTS.scorer }
			);
			return { id: insertId, email, name, client: await signedIn(email) };
		};
		const A = await person('Wanda');
		const B = await person('Xavi');
		const R = await person('Yusra');
		const abr = { first: A.email, second: B.email, reviewer: R.email };
		const code = (n: number) => `WL-${tag}-${n}`;

		const p1 = await createViaForm(lead, { ...abr, code: code(1) }); // nothing entered
		const p2 = await createViaForm(lead, { ...abr, code: code(2) }); // the first scorer has saved a draft
		const draft = await getPass(A.client, p2);
		const entry = await correctScores(p2, RAWS);
		expect(
			(await A.client.request(`/api/v1/protocols/${p2}/pass`, { method: 'PUT', json: { scores: entry, draftVersion: draft.body.draftVersion } })).status
		).toBe(200);
		const p3 = await createViaForm(lead, { ...abr, code: code(3) }); // awaiting the second pass
		expect((await saveAndSubmit(A.client, p3, await correctScores(p3, RAWS))).status).toBe(200);
		const p4 = await createViaForm(lead, { ...abr, code: code(4) }); // in review, two discrepancies (twoEntries)
		const two = await twoEntries(p4);
		expect((await saveAndSubmit(A.client, p4, two.first)).status).toBe(200);
		expect((await saveAndSubmit(B.client, p4, two.second)).status).toBe(200);
		const p5 = await createViaForm(lead, { ...abr, code: code(5) }); // in review, the passes agree: sign-off
		const same = await correctScores(p5, RAWS);
		expect((await saveAndSubmit(A.client, p5, same)).status).toBe(200);
		expect((await saveAndSubmit(B.client, p5, same)).status).toBe(200);
		const p6 = await createViaForm(lead, { ...abr, code: code(6) }); // verified: nobody's work
		const six = await correctScores(p6, RAWS);
		expect((await saveAndSubmit(A.client, p6, six)).status).toBe(200);
		expect((await saveAndSubmit(B.client, p6, six)).status).toBe(200);
		const lv = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id: p6 }))!.lock_version;
		expect((await R.client.request(`/api/v1/protocols/${p6}/signoff`, { method: 'POST', json: { lockVersion: lv } })).status).toBe(200);
		// duties the other way round: B first, R second, A reviews
		const p7 = await createViaForm(lead, { first: B.email, second: R.email, reviewer: A.email, code: code(7) });

		// the times the worklists sort by: scorers' items by creation, reviews by the move to review
		const at = (day: number, hour = 10) => new Date(Date.UTC(2026, 0, day, hour));
		const times: Array<[number, Date, Date]> = [
			[p1, at(4), at(4)],
			[p2, at(3), at(3)],
			[p3, at(1), at(2, 9)],
			[p4, at(1), at(5)],
			[p5, at(1), at(2)],
			[p6, at(1), at(6)],
			[p7, at(3, 12), at(3, 12)]
		];
		for (const [id, created, changed] of times)
			await exec('UPDATE protocols SET created_at = :created, status_changed_at = :changed WHERE id = :id', { id, created, changed });

		const battery = 'Harbourview Brief Screen';
		const item = (kind: string, protocolId: number, n: number, since: Date, status: string, open: number, draftStarted: boolean) => ({
			kind,
			protocolId,
			code: code(n),
			battery,
			since: since.toISOString(),
			status,
			open,
			draftStarted
		});
		const api = async (c: Client) => {
			const r = await c.get('/api/v1/worklist');
			expect(r.status).toBe(200);
			return (await r.json()).items;
		};
		// A: two first passes to enter (the saved draft is older); reviews: none (p7 is still in entry)
		expect(await api(A.client)).toEqual([item('enter_first', p2, 2, at(3), 'draft', 0, true), item('enter_first', p1, 1, at(4), 'draft', 0, false)]);
		// B: the second passes of p3, p2, p1 and the first pass of p7, oldest first
		expect(await api(B.client)).toEqual([
			item('enter_second', p3, 3, at(1), 'awaiting_second', 0, false),
			item('enter_second', p2, 2, at(3), 'draft', 0, false),
			item('enter_first', p7, 7, at(3, 12), 'draft', 0, false),
			item('enter_second', p1, 1, at(4), 'draft', 0, false)
		]);
		// R: a sign-off (no discrepancy), the second pass of p7, a review with two open discrepancies
		expect(await api(R.client)).toEqual([
			item('sign_off', p5, 5, at(2), 'in_review', 0, false),
			item('enter_second', p7, 7, at(3, 12), 'draft', 0, false),
			item('review', p4, 4, at(5), 'in_review', 2, false)
		]);
		// at most `limit` of each kind of work, the oldest
		const actor = (u: typeof A) => ({ id: u.id, name: u.name, roles: ['scorer', 'reviewer'] as ('scorer' | 'reviewer')[] });
		expect((await worklist(actor(B), 2)).map((i) => [i.kind, i.protocolId])).toEqual([
			['enter_second', p3],
			['enter_second', p2]
		]);
		expect((await worklist(actor(R), 1)).map((i) => [i.kind, i.protocolId])).toEqual([
			['sign_off', p5],
			['enter_second', p7]
		]);

		// the protocol list: newest first, names, the open count (the current round's), single pass
		const row = (id: number, n: number, status: string, who: { name: string }[], open: number, changed: Date) => ({
			id,
			code: code(n),
			battery,
			test_date: '2026-11-20',
			status,
			round: 1,
			first_name: who[0].name,
			second_name: who[1].name,
			reviewer_name: who[2].name,
			status_changed_at: changed,
			open_discrepancies: open,
			single_pass: false
		});
		const all = [
			row(p7, 7, 'draft', [B, R, A], 0, at(3, 12)),
			row(p6, 6, 'verified', [A, B, R], 0, at(6)),
			row(p5, 5, 'in_review', [A, B, R], 0, at(2)),
			row(p4, 4, 'in_review', [A, B, R], 2, at(5)),
			row(p3, 3, 'awaiting_second', [A, B, R], 0, at(2, 9)),
			row(p2, 2, 'draft', [A, B, R], 0, at(3)),
			row(p1, 1, 'draft', [A, B, R], 0, at(4))
		];
		const plain = (x: { rows: unknown[]; total: number }) => ({
			total: x.total,
			rows: x.rows.map((r) => ({
				...(r as object),
				test_date: String((r as { test_date: unknown }).test_date).slice(0, 10),
				open_discrepancies: Number((r as { open_discrepancies: unknown }).open_discrepancies)
			}))
		});
		// every account here holds a duty on all seven (scorer of some, reviewer of others)
		for (const u of [A, B, R]) expect(plain(await listProtocols(actor(u), {})), u.name).toEqual({ total: 7, rows: all });
		// as a scorer only: the protocols where they enter a pass
		expect(plain(await listProtocols({ ...actor(A), roles: ['scorer'] }, {}))).toEqual({ total: 6, rows: all.slice(1) });
		expect(plain(await listProtocols({ ...actor(R), roles: ['scorer'] }, {}))).toEqual({ total: 1, rows: all.slice(0, 1) });
		// as a reviewer only, and filtered by status
		expect(plain(await listProtocols({ ...actor(A), roles: ['reviewer'] }, {}))).toEqual({ total: 1, rows: all.slice(0, 1) });
		expect(plain(await listProtocols({ ...actor(R), roles: ['reviewer'] }, { status: 'in_review' }))).toEqual({ total: 2, rows: all.slice(2, 4) });
		// a lead sees every protocol; the code search finds these seven, a page of 10 holds them all
		const leadActor = { id: await userId(ACCOUNTS.lead), name: 'lead', roles: ['lead'] as 'lead'[] };
		expect(plain(await listProtocols(leadActor, { q: `WL-${tag}-` }))).toEqual({ total: 7, rows: all });
		expect(plain(await listProtocols(leadActor, { q: `WL-${tag}-`, status: 'draft', perPage: 10, page: 1 }))).toEqual({
			total: 3,
			rows: [all[0], all[5], all[6]]
		});

		// pages of 10 (the smallest): five more protocols of A's with the demo accounts, so A as a
		// scorer holds 11; the newest 10 on page 1, the oldest on page 2
		const demo = await select<{ email: string; name: string }>('SELECT email, name FROM users WHERE email IN (:e)', {
			e: [ACCOUNTS.scorer2, ACCOUNTS.reviewer]
		});
		const nameOf = (email: string) => ({ name: demo.find((d) => d.email === email)!.name });
		const more: number[] = [];
		for (let n = 8; n <= 12; n++)
			more.push(await createViaForm(lead, { first: A.email, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, code: code(n) }));
		for (const id of more) await exec('UPDATE protocols SET status_changed_at = :at WHERE id = :id', { id, at: at(7) });
		const extra = more.map((id, i) => row(id, 8 + i, 'draft', [A, nameOf(ACCOUNTS.scorer2), nameOf(ACCOUNTS.reviewer)], 0, at(7))).reverse();
		const asScorer = { ...actor(A), roles: ['scorer'] as 'scorer'[] };
		expect(plain(await listProtocols(asScorer, { perPage: 10, page: 1 }))).toEqual({ total: 11, rows: [...extra, ...all.slice(1, 6)] });
		expect(plain(await listProtocols(asScorer, { perPage: 10, page: 2 }))).toEqual({ total: 11, rows: [all[6]] });
		expect(plain(await listProtocols(asScorer, { perPage: 10, page: 2, status: 'draft' }))).toEqual({ total: 7, rows: [] });
	}, 120_000);
});

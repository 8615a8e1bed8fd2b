/**
 * CSV exports and file names against the running app (issue 12, item 16): a verified protocol's
 * summary.csv whose norm set's name and source carry formulas, commas, quotes and line breaks; the
 * catalog's test export with formula-like names; an upload whose name carries a right-to-left
 * override. Each file is read back with papaparse and every cell judged by the rule written here.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import Papa from 'papaparse';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit } from '../helpers/workflow';
import { exec, selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

let lead: Client, rita: Client, sam: Client, rae: Client;
beforeAll(async () => {
	[lead, rita, sam, rae] = await Promise.all([signedIn('lead'), signedIn('reviewer'), signedIn('scorer'), signedIn('scorer2')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

/** Would a spreadsheet run this cell? (OWASP "CSV Injection": = + - @ tab CR; after spaces or line breaks too.) */
const runs = (cell: string) => (/^\s*[=+\-@]/.test(cell) || /^[\t\r]/.test(cell)) && !/^\s*[+-]?\d+(\.\d+)?\s*$/.test(cell);
const parse = (csv: string) => Papa.parse<string[]>(csv.replace(/^\ufeff/, ''), { skipEmptyLines: true }).data as string[][];
const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
const BIDI = /[\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]/;

describe('formula injection in CSV exports (item 16)', () => {
	it('summary.csv: the "# Norms:" line and every cell are safe, whatever the norm set is called', async () => {
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		const scores = await correctScores(id, RAWS);
		expect((await saveAndSubmit(sam, id, scores)).status).toBe(200);
		expect((await saveAndSubmit(rae, id, scores)).status).toBe(200); // identical passes: nothing to resolve
		const lock = (await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id }))!.lock_version;
		expect((await rita.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: lock } })).status).toBe(200);
		const set = (await selectOne<{ id: number; name: string; source: string }>(
			'SELECT n.id, n.name, n.source FROM norm_sets n JOIN protocols p ON p.norm_set_id = n.id WHERE p.id = :id',
			{ id }
		))!;
		// a name and source as an older import or a careless edit could have left them
		const name = 'Harbour norms\r\n=HYPERLINK("http://evil.example","x")';
		const source = 'Invented, =1+1 "quoted"\n@SUM(A1)';
		await exec('UPDATE norm_sets SET name = :name, source = :source WHERE id = :id', { id: set.id, name, source });
		try {
			const res = await rita.get(`/protocols/${id}/summary.csv`);
			expect(res.status).toBe(200);
			expect(res.headers.get('content-disposition')).not.toMatch(BIDI);
			const csv = await res.text();
			const rows = parse(csv);
			expect(rows.flat().filter(runs)).toEqual([]);
			// the comment lines are one cell each, with the line breaks made spaces
			const norms = rows.filter((r) => r[0].startsWith('# Norms:'));
			expect(norms).toEqual([
				['# Norms: Harbour norms =HYPERLINK("http://evil.example","x") (' + (await version(set.id)) + '). Invented, =1+1 "quoted" @SUM(A1)']
			]);
			expect(rows.at(-1)).toEqual(['# Scores support, and never replace, the judgement of a licensed clinician.']);
			// the file has the header, one row per test (5), and the two comment lines, nothing else
			expect(rows.length).toBe(1 + 5 + 2);
		} finally {
			await exec('UPDATE norm_sets SET name = :name, source = :source WHERE id = :id', set);
		}
	}, 90_000);

	it('the catalog export escapes formula-like names and notes, also after a line break', async () => {
		const code = `inj-${Date.now().toString(36)}`;
		await exec(
			`INSERT INTO tests (code, version, name, domain, direction, raw_min, raw_max, raw_decimals, reported, notes)
			 SELECT :code, 1, :name, domain, 'higher_better', 0, 10, 0, 'z', :notes FROM tests LIMIT 1`,
			{ code, name: '\n=cmd|" /C calc"!A0', notes: '-2+3\nsecond line' }
		);
		try {
			const res = await lead.get('/catalog/export/tests');
			expect(res.status).toBe(200);
			const rows = parse(await res.text());
			const mine = rows.find((r) => r[0] === code);
			expect(mine).toBeDefined();
			expect(rows.flat().filter(runs)).toEqual([]);
			expect(mine![1]).toBe(`'\n=cmd|" /C calc"!A0`);
		} finally {
			await exec('DELETE FROM tests WHERE code = :code', { code });
		}
	});
});

async function version(normSetId: number) {
	return (await selectOne<{ version: string }>('SELECT version FROM norm_sets WHERE id = :id', { id: normSetId }))!.version;
}

describe('bidi controls in file names (item 16)', () => {
	it('an upload named with a right-to-left override is stored and served without it', async () => {
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		const fd = new FormData();
		// shows as "scanexe.png" ... reversed: a file that looks like a PNG but names itself .exe
		fd.append('file', new File([new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13])], 'scan\u202egnp.exe'));
		const res = await sam.request(`/protocols/${id}?/upload`, {
			method: 'POST',
			body: fd,
			headers: { 'x-sveltekit-action': 'true', accept: 'application/json' }
		});
		expect((await res.json()).type).toBe('success');
		const row = (await selectOne<{ id: number; filename: string }>('SELECT id, filename FROM attachments WHERE protocol_id = :id', { id }))!;
		expect(row.filename).toBe('scangnp.exe');
		const dl = await sam.get(`/protocols/${id}/attachments/${row.id}`);
		expect(dl.status).toBe(200);
		const cd = dl.headers.get('content-disposition')!;
		expect(cd).not.toMatch(BIDI);
		expect(cd).not.toMatch(/%E2%80%AE/i);
		expect(await (await sam.get(`/protocols/${id}`)).text()).not.toMatch(BIDI);
		// a name stored before this fix is cleaned on the way out too
		await exec('UPDATE attachments SET filename = :f WHERE id = :id', { id: row.id, f: 'old\u202efdp.exe' });
		const old = await sam.get(`/protocols/${id}/attachments/${row.id}`);
		expect(old.headers.get('content-disposition')).toBe(`inline; filename="oldfdp.exe"; filename*=UTF-8''oldfdp.exe`);
	});
});

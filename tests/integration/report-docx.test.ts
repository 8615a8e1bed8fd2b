/**
 * "Download for the report": the Summary as a Word document, read back with an independent reader
 * (pandoc, from Debian) as plain text and as pandoc's document tree, so the check does not go
 * through the library that wrote it. Expected values are worked out by hand below.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { execFile, execFileSync } from 'node:child_process';
import { promisify } from 'node:util';
import { mkdtempSync, writeFileSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { ACCOUNTS, signedIn, type Client } from '../helpers/http';
import { throughWorkflow, uniqueCode } from '../helpers/workflow';
import { tidewaterProtocol } from '../helpers/tidewater';
import { closeDb } from '../../src/lib/server/db';

let reviewer: Client;
let id: number;
let code: string;
let file: string;
let tideCode: string;
let tideFile: string;

beforeAll(async () => {
	const c = { lead: await signedIn('lead'), first: await signedIn('scorer'), second: await signedIn('scorer2'), reviewer: await signedIn('reviewer') };
	reviewer = c.reviewer;
	code = uniqueCode('DOC');
	// brief-screen, born 1988-05-17, tested 2026-11-20: age 38;6;3, norm band a30 (30;0–39;11)
	id = await throughWorkflow(c, {
		first: ACCOUNTS.scorer,
		second: ACCOUNTS.scorer2,
		reviewer: ACCOUNTS.reviewer,
		code,
		birthDate: '1988-05-17',
		testDate: '2026-11-20',
		raws: { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 },
		verify: true
	});
	const res = await reviewer.get(`/protocols/${id}/summary.docx`);
	expect(res.status).toBe(200);
	expect(res.headers.get('content-type')).toBe('application/vnd.openxmlformats-officedocument.wordprocessingml.document');
	expect(res.headers.get('content-disposition')).toBe(`attachment; filename="summary-${code}.docx"`);
	file = join(mkdtempSync(join(tmpdir(), 'ct-docx-')), 'summary.docx');
	writeFileSync(file, Buffer.from(await res.arrayBuffer()));

	// a verified Tidewater protocol (tables, two composites, a band), both passes right: tests/helpers/tidewater.ts
	tideCode = uniqueCode('DOCTW');
	const tide = await tidewaterProtocol(c, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer, code: tideCode }, { verify: true });
	const tr = await reviewer.get(`/protocols/${tide}/summary.docx`);
	expect(tr.status).toBe(200);
	tideFile = join(mkdtempSync(join(tmpdir(), 'ct-docx-')), 'summary.docx');
	writeFileSync(tideFile, Buffer.from(await tr.arrayBuffer()));
}, 180_000);

afterAll(() => closeDb());

// asynchronous: a synchronous child process would block the event loop for seconds, and the HTTP
// client would then reuse a keep-alive socket the app has meanwhile closed ("other side closed")
const run = promisify(execFile);
const pandoc = async (to: string, of = file) => (await run('pandoc', ['-f', 'docx', '-t', to, '--columns=250', of], { maxBuffer: 64 << 20 })).stdout;

type Inline = { t: string; c?: unknown };
const text = (inlines: Inline[]): string =>
	inlines
		.map((i) =>
			i.t === 'Str'
				? (i.c as string)
				: i.t === 'Space' || i.t === 'SoftBreak' || i.t === 'LineBreak'
					? ' '
					: Array.isArray(i.c)
						? text((i.c as unknown[]).flat(2).filter((x): x is Inline => !!x && typeof x === 'object' && 't' in x))
						: ''
		)
		.join('');

describe('the report document (.docx)', () => {
	it('opens in an independent reader with the facts, the domain groups in order, labels, CIs and the notes', async () => {
		const plain = (await pandoc('plain')).replace(/[ \t]+/g, ' ');
		for (const s of [
			`Score summary · ${code}`,
			`Examinee: ${code}`,
			'Test date: 2026-11-20',
			'Age at testing: 38;6;3',
			'Battery: Harbourview Brief Screen',
			'Norms: Harbourview Adult Norms 2024',
			'AACN',
			'95% CI = score ± 1.96 · SEM',
			'never replace, the judgement of a licensed clinician'
		])
			expect(plain).toContain(s);
		// domains in administration order of the battery (speed, memory, language, executive)
		const order = ['Processing speed', 'Memory', 'Language', 'Executive function'].map((d) => plain.indexOf(d));
		expect(order.every((x) => x > 0)).toBe(true);
		expect([...order].sort((a, b) => a - b)).toEqual(order);
	});

	it('is one table: 9 columns, the header row marked to repeat, one spanning row per domain, one row per test with hand-worked values', async () => {
		const doc = JSON.parse(await pandoc('json')) as { blocks: { t: string; c: unknown[] }[] };
		const tables = doc.blocks.filter((b) => b.t === 'Table');
		expect(tables).toHaveLength(1);
		// pandoc's Table: [attr, caption, colspecs, head, bodies, foot]
		const [, , colspecs, head, bodies] = tables[0].c as [unknown, unknown, unknown[], [unknown, Row[]], [unknown, number, Row[], Row[]][]];
		type Cell = [unknown, unknown, number, number, { t: string; c: Inline[] }[]];
		type Row = [unknown, Cell[]];
		const cellText = (cell: Cell) =>
			cell[4]
				.map((b) => text(b.c))
				.join(' ')
				.trim();
		expect(colspecs).toHaveLength(9);
		const headRows = head[1];
		expect(headRows).toHaveLength(1);
		expect(headRows[0][1].map(cellText)).toEqual([
			'Test',
			'Raw score',
			'z-score',
			'Standard score',
			'Scaled score',
			'T-score',
			'Percentile',
			'Descriptive label',
			'95% CI'
		]);
		const rows = bodies.flatMap((b) => b[3]);
		// 4 domain rows + 5 tests
		expect(rows).toHaveLength(9);
		const domainRows = rows.filter((r) => r[1].length === 1);
		expect(domainRows.map((r) => cellText(r[1][0]))).toEqual(['Processing speed', 'Memory', 'Language', 'Executive function']);
		expect(domainRows.every((r) => r[1][0][3] === 9)).toBe(true); // the domain cell spans all 9 columns
		const byName = new Map(rows.filter((r) => r[1].length === 9).map((r) => [cellText(r[1][0]).replace(/ \(.*$/, ''), r[1].map(cellText)]));
		// Harbour Word Recall, group a30 mean 24.5 SD 4.2, raw 29: z = 4.5 / 4.2 = 1.0714 → 1.07;
		// standard 100 + 15 × 1.0714 = 116.07 → 116; scaled 10 + 3 × 1.0714 = 13.21 → 13;
		// T 50 + 10 × 1.0714 = 60.71 → 61; percentile Φ(1.0714) = 0.858 → 86;
		// label on the standard score: 110–119 "High average" (AACN 2020);
		// 95% CI on the standard score, reliability 0.84: SEM = 15 × √0.16 = 6, 1.96 × 6 = 11.76,
		// 116 ± 11.76 = 104.24 to 127.76 → 104–128.
		expect(byName.get('Harbour Word Recall')).toEqual(['Harbour Word Recall (words)', '29', '1.07', '116', '13', '61', '86', 'High average (SS)', '104–128']);
		// Speeded Figure Match, a30 mean 42.0 SD 6.0, lower is better, raw 36.0: z = −(36 − 42) / 6 = +1.00;
		// standard 115, scaled 13, T 60, percentile Φ(1) = 0.8413 → 84; label "High average" (110–119);
		// CI: SEM = 15 × √(1 − 0.88) = 5.196, 1.96 × 5.196 = 10.18, 115 ± 10.18 = 104.82 to 125.18 → 105–125.
		expect(byName.get('Speeded Figure Match')).toEqual([
			'Speeded Figure Match (seconds, lower is better)',
			'36.0',
			'1.00',
			'115',
			'13',
			'60',
			'84',
			'High average (SS)',
			'105–125'
		]);
		// a test that does not report a field leaves its cell empty, never a dash (Delayed recall reports scaled and percentile only)
		const delayed = byName.get('Harbour Word Recall, Delayed')!;
		expect([delayed[2], delayed[3], delayed[5]]).toEqual(['', '', '']);
	});

	it('leads with the composites (Tidewater battery): a Composites row first, each composite with its sum, index score, label and CI; bands as written', async () => {
		const doc = JSON.parse(await pandoc('json', tideFile)) as { blocks: { t: string; c: unknown[] }[] };
		const tables = doc.blocks.filter((b) => b.t === 'Table');
		expect(tables).toHaveLength(1);
		const [, , , , bodies] = tables[0].c as [unknown, unknown, unknown[], unknown, [unknown, number, Row[], Row[]][]];
		type Cell = [unknown, unknown, number, number, { t: string; c: Inline[] }[]];
		type Row = [unknown, Cell[]];
		const cellText = (cell: Cell) =>
			cell[4]
				.map((b) => text(b.c))
				.join(' ')
				.trim();
		const rows = bodies.flatMap((b) => b[3]).map((r) => r[1].map(cellText));
		// the first row is the Composites heading, then the two composites in the battery's order, then the domains
		expect(rows[0]).toEqual(['Composites']);
		// Memory Index: Σ 27, SS 120 (above), %ile 91; label on SS 120–129 "Above average" (AACN 2020, Guilmette et al.; from memory);
		// 95% CI, reliability .90: SEM = 15·√0.10 = 4.743, 1.96·4.743 = 9.30, 120 ± 9.30 = 110.70–129.30 → 111–129.
		expect(rows[1]).toEqual([
			'Memory Index (scaled scores of Harbour Word Recall + Tile Build)',
			'Σ 27',
			'',
			'120',
			'',
			'',
			'91',
			'Above average (SS)',
			'111–129'
		]);
		// Visuomotor Index: Σ 23, SS 106 (table row 22–23), %ile 66; 90–109 "Average";
		// reliability .88: SEM = 15·√0.12 = 5.196, 1.96·5.196 = 10.18, 106 ± 10.18 = 95.82–116.18 → 96–116.
		expect(rows[2]).toEqual(['Visuomotor Index (scaled scores of Knot Copy + Cargo Code)', 'Σ 23', '', '106', '', '', '66', 'Average (SS)', '96–116']);
		expect(rows[3]).toHaveLength(1); // the first domain's heading follows the composites
		// the percentile-band test keeps its band as entered, marked as a band
		const beacon = rows.find((r) => r[0].startsWith('Beacon Watch False Alarms'))!;
		expect(beacon[6]).toBe('50-74 band');
		const plain = (await pandoc('plain', tideFile)).replace(/[ \t]+/g, ' ');
		expect(plain).toContain('Σ: a composite’s sum of its parts’ scores');
		expect(plain).toContain('Battery: Tidewater Cognitive Profile');
	});

	it("asks for the app's font, IBM Plex Sans, in the document's styles", () => {
		// the .docx is a zip; its styles part names the default font
		const styles = execFileSync('unzip', ['-p', file, 'word/styles.xml']).toString();
		expect(styles).toMatch(/w:rFonts[^>]*w:ascii="IBM Plex Sans"/);
		expect(readFileSync(file).subarray(0, 2).toString()).toBe('PK');
	});

	it('is closed to scorers and to reviewers of other protocols, like the Summary', async () => {
		const scorer = await signedIn('scorer');
		expect((await scorer.get(`/protocols/${id}/summary.docx`)).status).toBe(403);
		const lead = await signedIn('lead');
		expect((await lead.get(`/protocols/${id}/summary.docx`)).status).toBe(200);
		expect((await reviewer.get(`/protocols/999999/summary.docx`)).status).toBe(404);
	});
});

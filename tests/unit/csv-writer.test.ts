/**
 * The one CSV writer (src/lib/csv.ts) and file names (src/lib/server/filenames.ts), item 16 of
 * issue 12: formula-like values are escaped even when they hold or follow a line break, comment
 * lines cannot start a new line or cell, and bidi controls never reach a file name.
 *
 * The checks read the written file back with papaparse (a reader, not the writer under test) and
 * judge each cell with a rule written here: a cell a spreadsheet would run starts, after any
 * whitespace or line breaks, with = + - @ (or a full-width form), or starts with a tab or CR,
 * and is not a plain number. (OWASP "CSV Injection" lists = + - @ tab and CR; the full-width forms
 * are a precaution, common practice.)
 */
import { describe, expect, it } from 'vitest';
import Papa from 'papaparse';
import { writeCsv } from '../../src/lib/csv';
import { isFormulaLike as catalogIsFormulaLike, testsToCsv } from '../../src/lib/catalog/csv';
import { validateCsvText } from '../../src/lib/catalog/parse';
import { toCsv as auditCsv, type ReportResult } from '../../src/lib/server/audit-stats';
import { cleanFilename, contentDisposition, stripBidi } from '../../src/lib/server/filenames';

const runs = (cell: string) => (/^\s*[=+\-@\uFF1D\uFF0B\uFF0D\uFF20]/.test(cell) || /^[\t\r]/.test(cell)) && !/^\s*[+-]?\d+(\.\d+)?\s*$/.test(cell);
const cells = (csv: string) => (Papa.parse<string[]>(csv.replace(/^\ufeff/, ''), { skipEmptyLines: true }).data as string[][]).flat();

const MALICIOUS = [
	'=1+1',
	'=HYPERLINK("http://evil.example","x")\nsecond line', // papaparse's own pattern misses this (no match across \n)
	"\n=cmd|' /C calc'!A0", // the formula after a leading line break
	'\r\n@SUM(A1:A9)',
	'  +A1', // after spaces
	'-2+3',
	'\tfoo',
	'\rbar',
	'＝1+1' // full-width equals sign
];

describe('one CSV writer', () => {
	it('escapes every formula-like value, with or after a line break; leaves numbers and text alone', () => {
		const csv = writeCsv(
			['name', 'value'],
			MALICIOUS.map((m, i) => [m, String(i)])
		);
		const read = cells(csv);
		expect(read.filter(runs)).toEqual([]);
		// each malicious value comes back with exactly one leading apostrophe, nothing else changed
		for (const m of MALICIOUS) expect(read).toContain(`'${m}`);
		const plain = writeCsv(
			['z', 'text'],
			[
				['-1.25', 'a-b'],
				['+2', 'x=1'],
				[-3, null]
			]
		);
		expect(plain).toBe('z,text\r\n-1.25,a-b\r\n+2,x=1\r\n-3,\r\n');
	});

	it('papaparse alone lets the line-break cases through (why the writer has its own pattern)', () => {
		const raw = Papa.unparse([[MALICIOUS[1]], [MALICIOUS[2]]], { escapeFormulae: true });
		expect(cells(raw).filter(runs).length).toBe(2);
	});

	it('writes comment lines as one cell: a comma, quote or line break in them cannot start a new cell or line', () => {
		const csv = writeCsv(['a'], [['1']], { comments: ['# Norms: Invented norms (1). Smith, =HYPERLINK("http://evil.example")\r\n=1+1', '# Plain'] });
		const lines = csv.split('\r\n');
		// header, row, blank, two comment lines, and the final CRLF's empty tail
		expect(lines).toEqual(['a', '1', '', '"# Norms: Invented norms (1). Smith, =HYPERLINK(""http://evil.example"") =1+1"', '# Plain', '']);
		expect(cells(csv).filter(runs)).toEqual([]);
	});

	it('the catalog export escapes a formula after a line break, and its import reads the value back', () => {
		const t = {
			code: 'xq1',
			name: '\n=cmd',
			domain: 'memory',
			unit: '',
			direction: 'higher_better' as const,
			raw: { min: 0, max: 10, decimals: 0 },
			reported: ['z' as const],
			bounds: null,
			reliability: null,
			notes: '=1+1\nnote'
		};
		const csv = testsToCsv([t]);
		expect(cells(csv).filter(runs)).toEqual([]);
		expect(catalogIsFormulaLike('\n=cmd')).toBe(true);
		expect(catalogIsFormulaLike('-5')).toBe(false);
		// the import refuses a formula cell (it does not strip the apostrophe of a non-formula)
		const { result } = validateCsvText('tests', 'code,name,domain,direction,raw_min,raw_max,reported\nxq2,"\n=cmd",memory,higher_better,0,10,z\n', {
			testCodes: new Set(),
			domains: new Set(['memory'])
		});
		expect(result.errors.map((e) => e.message).join(' ')).toContain('looks like a spreadsheet formula');
	});

	it('the audit report CSV goes through the same writer', () => {
		const result = {
			report: 'kinds',
			title: 't',
			filters: {},
			columns: [
				{ key: 'scorer', label: 'Scorer' },
				{ key: 'rate', label: 'Rate', numeric: true }
			],
			rows: [
				{ scorer: '=cmd\nx', rate: 0.5 },
				{ scorer: '\n@SUM(A1)', rate: -0.25 }
			],
			notes: []
		} as unknown as ReportResult;
		const csv = auditCsv(result);
		expect(csv.startsWith('\ufeff')).toBe(true);
		expect(cells(csv).filter(runs)).toEqual([]);
		expect(cells(csv)).toEqual(['Scorer', 'Rate', "'=cmd\nx", '0.5', "'\n@SUM(A1)", '-0.25']);
	});
});

describe('file names', () => {
	const RLO = '\u202e';
	it('strips right-to-left overrides and the other bidi controls', () => {
		expect(stripBidi(`scan${RLO}fdp.exe`)).toBe('scanfdp.exe');
		expect(cleanFilename(`..\\x/inv\u2066oice\u2069${RLO}gnp.js\u200f.png`, 'f')).toBe('invoicegnp.js.png');
		expect(cleanFilename(`${RLO}\u202a\u200e`, 'record-form.png')).toBe('record-form.png');
	});
	it('Content-Disposition carries no bidi control, in either form', () => {
		const h = contentDisposition('attachment', `summary-${RLO}vsc.exe`);
		expect(h).not.toMatch(/[\u202a-\u202e\u2066-\u2069\u200e\u200f\u061c]/);
		expect(h).not.toContain('%E2%80%AE'); // U+202E percent-encoded in UTF-8
		expect(h).toBe(`attachment; filename="summary-vsc.exe"; filename*=UTF-8''summary-vsc.exe`);
		expect(contentDisposition('inline', 'Brief é.pdf')).toBe(`inline; filename="Brief _.pdf"; filename*=UTF-8''Brief%20%C3%A9.pdf`);
	});
});

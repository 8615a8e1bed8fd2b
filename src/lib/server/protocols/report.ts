/**
 * The score summary as a Word document (.docx) for pasting into a written report: a heading with
 * the examinee's pseudonymous code, test date, age, battery and norm source; one table with the
 * rows grouped by domain in the Summary's own order (composites first when the Summary lists them
 * first), descriptive labels and confidence intervals; the table notes (marks, formulas, label
 * scheme) and the product's caution beneath it.
 *
 * Fonts: the document asks for IBM Plex Sans (the app's face) and names a sans-serif fallback in the
 * font table, so a word processor without Plex substitutes a sans face instead of a serif one.
 * Numbers are right-aligned; the header row repeats on every page in the word processor.
 */
import {
	AlignmentType,
	BorderStyle,
	Document,
	HeightRule,
	Packer,
	PageOrientation,
	Paragraph,
	ShadingType,
	Table,
	TableCell,
	TableLayoutType,
	TableRow,
	TextRun,
	WidthType,
	type ParagraphChild
} from 'docx';
import type { protocolSummary, SummaryRow, CompositeSummaryRow } from './summary';
import { fieldWords } from '../../status';

type Summary = Awaited<ReturnType<typeof protocolSummary>>;

export const REPORT_FONT = 'IBM Plex Sans';
const INK = '1D2733';
const SOFT = '4A5563';
const LINE = 'B9AE9C';
const SUNK = 'EEE8DD';

const CAUTION =
	'Scores support, and never replace, the judgement of a licensed clinician. Interpretation, choice of norms and release of results follow local law and professional practice.';

const SHORT: Record<string, string> = { standard: 'SS', scaled: 'ScS', t: 'T', percentile: '%ile', z: 'z' };

/** The table's columns: header text, share of the table width (per cent), and whether it holds numbers. */
export const REPORT_COLUMNS = [
	{ head: 'Test', width: 25, num: false },
	{ head: 'Raw score', width: 8, num: true },
	{ head: 'z-score', width: 8, num: true },
	{ head: 'Standard score', width: 9, num: true },
	{ head: 'Scaled score', width: 8, num: true },
	{ head: 'T-score', width: 7, num: true },
	{ head: 'Percentile', width: 9, num: true },
	{ head: 'Descriptive label', width: 15, num: false },
	{ head: '95% CI', width: 11, num: true }
] as const;

const run = (text: string, opts: { bold?: boolean; size?: number; color?: string; superScript?: boolean; italics?: boolean } = {}) =>
	new TextRun({
		text,
		font: REPORT_FONT,
		size: opts.size ?? 18,
		bold: opts.bold,
		color: opts.color ?? INK,
		superScript: opts.superScript,
		italics: opts.italics
	});

const border = { style: BorderStyle.SINGLE, size: 4, color: LINE };
const none = { style: BorderStyle.NONE, size: 0, color: 'FFFFFF' };

function cell(children: ParagraphChild[], opts: { num?: boolean; span?: number; shade?: boolean; header?: boolean; width?: number } = {}) {
	return new TableCell({
		children: [new Paragraph({ children, alignment: opts.num ? AlignmentType.RIGHT : AlignmentType.LEFT, spacing: { before: 20, after: 20 } })],
		columnSpan: opts.span,
		width: opts.width ? { size: opts.width, type: WidthType.PERCENTAGE } : undefined,
		shading: opts.shade ? { type: ShadingType.CLEAR, fill: SUNK, color: 'auto' } : undefined,
		margins: { left: 80, right: 80, top: 20, bottom: 20 },
		borders: { top: opts.header ? border : none, bottom: border, left: none, right: none }
	});
}

function rowCells(r: SummaryRow): TableCell[] {
	const v = (f: 'z' | 'standard' | 'scaled' | 't') => (r.reported.includes(f) ? (r.values[f] ?? '—') : '');
	const testCell: ParagraphChild[] = [run(r.name)];
	const detail = `${r.unit}${r.direction === 'lower_better' ? ', lower is better' : ''}`;
	if (detail) testCell.push(run(` (${detail})`, { color: SOFT, size: 16 }));
	if (r.inconsistent) testCell.push(run(' ‡', { bold: true }));
	// a percentile-only norm: the band as written, and that it is a band
	const pct: ParagraphChild[] = r.band ? [run(r.band.text), run(' band', { color: SOFT, size: 16 })] : [run(r.percentile ? r.percentile.value : '—')];
	if (r.percentile?.recomputed) pct.push(run('†', { superScript: true }));
	const label: ParagraphChild[] = [run(r.label?.text ?? '—')];
	if (r.label) label.push(run(` (${SHORT[r.label.basis]})`, { color: SOFT, size: 16 }));
	const ci = r.ci ? `${r.ci.lower}–${r.ci.upper}` : '—';
	return [
		cell(testCell),
		cell([run(r.raw ?? '—')], { num: true }),
		cell([run(v('z'))], { num: true }),
		cell([run(v('standard'))], { num: true }),
		cell([run(v('scaled'))], { num: true }),
		cell([run(v('t'))], { num: true }),
		cell(pct, { num: true }),
		cell(label),
		cell([run(ci)], { num: true })
	];
}

/** A composite's row: its name and parts, the sum of the parts in the raw-score column (Σ), its scores, label and CI. */
function compositeCells(c: CompositeSummaryRow): TableCell[] {
	const v = (f: 'z' | 'standard' | 'scaled' | 't') => (c.reported.includes(f) ? (c.values[f] ?? '—') : '');
	const label: ParagraphChild[] = [run(c.label?.text ?? '—')];
	if (c.label) label.push(run(` (${SHORT[c.label.basis]})`, { color: SOFT, size: 16 }));
	return [
		cell([run(c.name, { bold: true }), run(` (${fieldWords(c.partField)}s of ${c.parts.map((x) => x.name).join(' + ')})`, { color: SOFT, size: 16 })]),
		cell([run(c.values.sum != null ? `Σ ${c.values.sum}` : '—')], { num: true }),
		cell([run(v('z'))], { num: true }),
		cell([run(v('standard'))], { num: true }),
		cell([run(v('scaled'))], { num: true }),
		cell([run(v('t'))], { num: true }),
		cell([run(c.values.percentile ?? '—')], { num: true }),
		cell(label),
		cell([run(c.ci ? `${c.ci.lower}–${c.ci.upper}` : '—')], { num: true })
	];
}

/** Rows grouped by domain, keeping the Summary's order of first appearance. */
export function domainGroups(rows: SummaryRow[]): { domain: string; rows: SummaryRow[] }[] {
	const out: { domain: string; rows: SummaryRow[] }[] = [];
	for (const r of rows) {
		const g = out.find((x) => x.domain === r.domain);
		if (g) g.rows.push(r);
		else out.push({ domain: r.domain, rows: [r] });
	}
	return out;
}

export function reportDocument(s: Summary): Document {
	const p = s.protocol;
	const header = new TableRow({
		tableHeader: true,
		cantSplit: true,
		children: REPORT_COLUMNS.map((c) => cell([run(c.head, { bold: true, size: 16, color: SOFT })], { num: c.num, header: true, width: c.width }))
	});
	const body: TableRow[] = [];
	// composites first, as on the Summary (a report leads with the index scores)
	const groups: { domain: string; rows: TableCell[][] }[] = [
		...(s.composites.length ? [{ domain: 'Composites', rows: s.composites.map(compositeCells) }] : []),
		...domainGroups(s.rows).map((g) => ({ domain: g.domain, rows: g.rows.map(rowCells) }))
	];
	for (const g of groups) {
		// keepNext on the domain row's paragraph keeps the heading with its first test across a page break
		body.push(
			new TableRow({
				cantSplit: true,
				height: { value: 280, rule: HeightRule.ATLEAST },
				children: [
					new TableCell({
						columnSpan: REPORT_COLUMNS.length,
						shading: { type: ShadingType.CLEAR, fill: SUNK, color: 'auto' },
						margins: { left: 80, right: 80, top: 20, bottom: 20 },
						borders: { top: none, bottom: border, left: none, right: none },
						children: [new Paragraph({ keepNext: true, children: [run(g.domain, { bold: true })] })]
					})
				]
			})
		);
		for (const cells of g.rows) body.push(new TableRow({ cantSplit: true, children: cells }));
	}
	const anyRecomputed = s.rows.some((r) => r.percentile?.recomputed);
	const anyInconsistent = s.rows.some((r) => r.inconsistent);
	const notes: Paragraph[] = [];
	const note = (children: ParagraphChild[]) => notes.push(new Paragraph({ children, spacing: { before: 40, after: 40 } }));
	note([
		run('Note. ', { italics: true, size: 16 }),
		run(
			`Descriptive labels: ${s.labelScheme.name}, on the score named after each label (SS standard score, T T-score, ScS scaled score, %ile percentile; the first of these the test reports).`,
			{ size: 16 }
		)
	]);
	note([
		run('95% CI = score ± 1.96 · SEM, SEM = SD · √(1 − reliability), on the labelled scale; shown where the test has a reliability coefficient.', { size: 16 })
	]);
	if (s.composites.length)
		note([
			run('Σ: a composite’s sum of its parts’ scores, from which the composite’s scores are looked up (its CI from the composite’s own reliability).', {
				size: 16
			})
		]);
	if (s.rows.some((r) => r.band))
		note([run(`Percentile bands (${s.offCurve.join(', ')}): the norms give bands only, as the manual prints them.`, { size: 16 })]);
	if (anyRecomputed)
		note([run('†', { superScript: true, size: 16 }), run(' Percentile recomputed from the verified raw score (the test does not report one).', { size: 16 })]);
	if (anyInconsistent)
		note([run("‡ A verified derived score differs from what the verified raw score gives with these norms; see the protocol's review record.", { size: 16 })]);
	note([run(`Norms: ${s.normSet ? `${s.normSet.name} (${s.normSet.version}). ${s.normSet.source}` : 'unknown'}`, { size: 16 })]);
	note([run(`Label scheme: ${s.labelScheme.source}`, { size: 16 })]);
	note([run(CAUTION, { size: 16, italics: true })]);

	const facts = [
		['Examinee', p.code],
		['Test date', p.testDate],
		['Age at testing', p.age],
		['Battery', p.battery],
		['Verified', `${p.verifiedAt ? new Date(p.verifiedAt).toISOString().slice(0, 10) : '—'}${p.verifiedBy ? ` by ${p.verifiedBy}` : ''}`]
	];
	return new Document({
		creator: 'Crosstally',
		title: `Score summary ${p.code}`,
		description: 'Verified scores for the written report',
		styles: { default: { document: { run: { font: REPORT_FONT, size: 18, color: INK } } } },
		sections: [
			{
				properties: {
					page: {
						// A4 portrait; a report template pasted into keeps its own page set-up
						size: { width: 11906, height: 16838, orientation: PageOrientation.PORTRAIT },
						margin: { top: 1134, bottom: 1134, left: 1020, right: 1020 }
					}
				},
				children: [
					new Paragraph({ children: [run(`Score summary · ${p.code}`, { bold: true, size: 28 })], spacing: { after: 80 } }),
					new Paragraph({
						children: facts.flatMap(([k, v], i) => [run(`${i ? ' · ' : ''}${k}: `, { color: SOFT }), run(v ?? '—')]),
						spacing: { after: 160 }
					}),
					new Table({
						rows: [header, ...body],
						width: { size: 100, type: WidthType.PERCENTAGE },
						layout: TableLayoutType.AUTOFIT,
						borders: { top: none, bottom: none, left: none, right: none, insideHorizontal: border, insideVertical: none }
					}),
					...notes
				]
			}
		]
	});
}

export async function summaryDocx(s: Summary): Promise<Buffer> {
	return Packer.toBuffer(reportDocument(s));
}

export const DOCX_TYPE = 'application/vnd.openxmlformats-officedocument.wordprocessingml.document';

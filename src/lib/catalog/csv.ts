/**
 * CSV layouts of the catalog (a norm set's groups; a test list), row validation and export.
 * Pure: the browser runs it in a worker while papaparse streams the file, and the server runs the
 * same code again on confirm (the client is never trusted).
 *
 * "Line" in messages is the spreadsheet row: the header is line 1, the first data row line 2 (a
 * quoted cell holding a newline still counts as one row, as a spreadsheet shows it).
 */
import {
	CODE_RE,
	DERIVED,
	DIRECTIONS,
	MAX_AGE_MONTHS,
	canonicalReported,
	testInputSchema,
	type Bounds,
	type Derived,
	type NormGroupInput,
	type TestInput
} from './schema';
import { rangeProblems, type RangeRow } from './ranges';
import { TABLE_SCALES, tableProblems, type RawSpan, type TableRowInput, type TableScale } from './norm-forms';
import { isFormulaLike, writeCsv, type CsvCell } from '../csv';

export type CsvKind = 'norms' | 'tests' | 'tables' | 'equations';
/** The kinds whose rows become norm groups of a norm set (imported into a new or an existing set). */
export const NORM_KINDS: readonly CsvKind[] = ['norms', 'tables', 'equations'];
export const KIND_NAMES: Record<CsvKind, string> = {
	norms: 'norm table (mean/SD)',
	tests: 'test list',
	tables: 'conversion tables',
	equations: 'regression equations'
};

/** The columns that say which group a norm-group row belongs to, in every kind of norms file. */
const GROUP_COLUMNS = ['test_code', 'group_code', 'age_min_months', 'age_max_months', 'sex', 'edu_min', 'edu_max'] as const;
const GROUP_REQUIRED = ['test_code', 'group_code', 'age_min_months', 'age_max_months'] as const;

export const NORM_COLUMNS = [...GROUP_COLUMNS, 'mean', 'sd', 'n'] as const;
export const NORM_REQUIRED = [...GROUP_REQUIRED, 'mean', 'sd'] as const;
export const TEST_COLUMNS = [
	'code',
	'name',
	'domain',
	'unit',
	'direction',
	'raw_min',
	'raw_max',
	'raw_decimals',
	'reported',
	'bounds',
	'reliability',
	'notes'
] as const;
export const TEST_REQUIRED = ['code', 'name', 'domain', 'direction', 'raw_min', 'raw_max', 'reported'] as const;

/** Conversion tables: one line per table row; the group's columns repeat on every row of its table. */
export const TABLE_COLUMNS = [...GROUP_COLUMNS, 'scale', 'raw_lo', 'raw_hi', 'score', 'percentile'] as const;
export const TABLE_REQUIRED = [...GROUP_REQUIRED, 'scale', 'raw_lo', 'raw_hi'] as const;
/** Regression equations: one line per group; coefficients b_age, b_education, b_sex (empty = not used). */
export const EQUATION_COLUMNS = [...GROUP_COLUMNS, 'intercept', 'b_age', 'b_education', 'b_sex', 'residual_sd', 'n'] as const;
export const EQUATION_REQUIRED = [...GROUP_REQUIRED, 'intercept', 'residual_sd'] as const;

export const COLUMNS: Record<CsvKind, readonly string[]> = { norms: NORM_COLUMNS, tests: TEST_COLUMNS, tables: TABLE_COLUMNS, equations: EQUATION_COLUMNS };
export const REQUIRED: Record<CsvKind, readonly string[]> = {
	norms: NORM_REQUIRED,
	tests: TEST_REQUIRED,
	tables: TABLE_REQUIRED,
	equations: EQUATION_REQUIRED
};

/** Other spellings accepted in a header, mapped to our column names. */
const ALIASES: Record<string, string> = {
	test: 'test_code',
	group: 'group_code',
	age_min: 'age_min_months',
	age_max: 'age_max_months',
	min_age_months: 'age_min_months',
	max_age_months: 'age_max_months',
	education_min: 'edu_min',
	education_max: 'edu_max',
	std: 'sd',
	standard_deviation: 'sd',
	test_code: 'test_code',
	decimals: 'raw_decimals',
	min: 'raw_min',
	max: 'raw_max',
	sum_lo: 'raw_lo',
	sum_hi: 'raw_hi',
	lo: 'raw_lo',
	hi: 'raw_hi',
	sd_residual: 'residual_sd',
	age: 'b_age',
	education: 'b_education'
};

export const LIMITS = {
	/** Largest file accepted, in bytes. */
	maxBytes: 16 * 1024 * 1024,
	/** Most data rows accepted. */
	maxRows: 200_000,
	/** Row messages kept (the count goes on). */
	maxErrorsListed: 500,
	sampleRows: 8
};

export function formatBytes(n: number): string {
	return n >= 1024 * 1024 ? `${(n / 1024 / 1024).toFixed(1)} MB` : n >= 1024 ? `${Math.round(n / 1024)} KB` : `${n} bytes`;
}

export interface RowError {
	line: number;
	column: string | null;
	message: string;
}

export interface ColumnMapping {
	/** As written in the file. */
	header: string;
	/** Our column it fills, or null when ignored. */
	field: string | null;
}

/** What a table must cover: a test's raw range or a composite's sum span, and the scale bounds. */
export interface SubjectSpan {
	subject: 'test' | 'composite';
	span: RawSpan;
	bounds: Record<string, [number, number]> | null;
	reported: string[];
}

export interface ValidationContext {
	/** Codes of current tests (a norm row naming another code is an unknown test). */
	testCodes: ReadonlySet<string>;
	/** Tables and equations: each test's and composite's span (composite codes are accepted in tables). */
	spans?: Readonly<Record<string, SubjectSpan>>;
	/** Domain codes (a test row naming another domain is refused). */
	domains: ReadonlySet<string>;
}

export interface PreviewResult {
	kind: CsvKind;
	columns: ColumnMapping[];
	/** Required columns the header lacks. */
	missingColumns: string[];
	/** File-level problems: empty, wrong delimiter, not CSV, too big, too many rows. Any of these stops the import. */
	fileErrors: string[];
	/** Data rows seen (blank lines not counted). */
	rowCount: number;
	/** The first rows as parsed, by our column names. */
	sample: { line: number; values: Record<string, string> }[];
	errors: RowError[];
	errorCount: number;
	/** Lines with at least one problem. */
	badLines: number;
}

export type ParsedRow<K extends CsvKind> = K extends 'tests' ? TestInput & { line: number } : NormGroupInput & { line: number };

const NUMBER_RE = /^[+-]?(\d+(\.\d*)?|\.\d+)$/;

function normHeader(h: string): string {
	return h
		.replace(/^\uFEFF/, '')
		.trim()
		.toLowerCase()
		.replace(/[\s-]+/g, '_');
}

/** A leading apostrophe protects a formula-like cell on export; strip it back on import. */
function unescapeCell(v: string): string {
	return v.length > 1 && v[0] === "'" && isFormulaLike(v.slice(1)) ? v.slice(1) : v;
}

export { isFormulaLike };

const DELIMS: [string, string][] = [
	[';', 'semicolons (;)'],
	['\t', 'tabs'],
	['|', 'vertical bars (|)']
];

/**
 * Validates one CSV, row by row as the parser hands them over, so a big file never sits in memory
 * as objects (only the range keys needed for the overlap check, and on the server the parsed rows).
 */
export class CsvValidator<K extends CsvKind> {
	readonly result: PreviewResult;
	/** Parsed rows (kept only when `keepRows`). */
	readonly rows: ParsedRow<K>[] = [];
	private map: (string | null)[] | null = null;
	private ranges: RangeRow[] = [];
	/** Conversion tables being read: per test and group, its keys, first line and rows with their lines. */
	private tables = new Map<string, { group: NormGroupInput & { line: number }; lines: number[]; keysText: string; bad: boolean }>();
	private seenCodes = new Map<string, number>();
	private lineErrors = new Set<number>();
	private line = 0;
	/** Columns of the current row already flagged (formula-like cells). */
	private flagged = new Set<string>();
	/** True once a file-level problem means the rest need not be read. */
	stopped = false;

	constructor(
		readonly kind: K,
		private ctx: ValidationContext,
		private keepRows = false
	) {
		this.result = { kind, columns: [], missingColumns: [], fileErrors: [], rowCount: 0, sample: [], errors: [], errorCount: 0, badLines: 0 };
	}

	fileError(message: string): void {
		this.result.fileErrors.push(message);
		this.stopped = true;
	}

	/** A problem with the record just pushed (e.g. an unclosed quote reported by the parser). */
	rowProblem(message: string): void {
		if (this.map !== null && this.line > 1) this.err(this.line, null, message);
	}

	private err(line: number, column: string | null, message: string): void {
		if (column && this.flagged.has(column) && !message.includes('formula')) return; // already named as a formula
		this.result.errorCount++;
		if (!this.lineErrors.has(line)) {
			this.lineErrors.add(line);
			this.result.badLines++;
		}
		if (this.result.errors.length < LIMITS.maxErrorsListed) this.result.errors.push({ line, column, message });
	}

	/** Feed the next parsed record (an array of cells). */
	push(cells: string[]): void {
		if (this.stopped) return;
		this.line++;
		if (this.map === null) return this.header(cells);
		if (cells.every((c) => c.trim() === '')) return; // blank line
		this.result.rowCount++;
		if (this.result.rowCount > LIMITS.maxRows) {
			this.fileError(`The file has more than ${LIMITS.maxRows.toLocaleString('en')} rows, the most one import takes. Split it into smaller files.`);
			return;
		}
		const line = this.line;
		const values: Record<string, string> = {};
		this.flagged.clear();
		if (cells.length > this.map.length) {
			const extra = cells.slice(this.map.length);
			if (extra.some((c) => c.trim() !== ''))
				this.err(line, null, `Has ${cells.length} cells but the header has ${this.map.length} columns (an unquoted comma?)`);
		}
		for (let i = 0; i < this.map.length; i++) {
			const f = this.map[i];
			if (!f) continue;
			const raw = cells[i] ?? '';
			if (isFormulaLike(raw)) {
				this.err(
					line,
					f,
					`${f}: "${clip(raw)}" looks like a spreadsheet formula (starts with "${raw[0] === '\t' ? 'tab' : raw[0] === '\r' ? 'carriage return' : raw.trimStart()[0]}"); type the value itself`
				);
				values[f] = '';
				this.flagged.add(f);
				continue;
			}
			values[f] = unescapeCell(raw).trim();
		}
		if (this.result.sample.length < LIMITS.sampleRows) {
			const shown: Record<string, string> = {};
			for (let i = 0; i < this.map.length; i++) if (this.map[i]) shown[this.map[i]!] = cells[i] ?? '';
			this.result.sample.push({ line, values: shown });
		}
		if (this.kind === 'norms') this.normRow(line, values);
		else if (this.kind === 'tables') this.tableRow(line, values);
		else if (this.kind === 'equations') this.equationRow(line, values);
		else this.testRow(line, values);
	}

	private header(cells: string[]): void {
		const cols = COLUMNS[this.kind];
		const names = cells.map(normHeader);
		if (names.length === 1 && names[0] === '') {
			this.map = null;
			this.line = 0;
			return; // leading blank line: the header is the next record
		}
		const mapped = names.map((n) => {
			const f = cols.includes(n) ? n : ALIASES[n] && cols.includes(ALIASES[n]) ? ALIASES[n] : null;
			return f;
		});
		const present = new Set(mapped.filter(Boolean));
		const missing = REQUIRED[this.kind].filter((c) => !present.has(c));
		this.result.columns = cells.map((h, i) => ({ header: h.replace(/^\uFEFF/, ''), field: mapped[i] }));
		this.result.missingColumns = missing;
		if (missing.length === 0) {
			const dup = mapped.find((f, i) => f && mapped.indexOf(f) !== i);
			if (dup) return this.fileError(`The column ${dup} appears twice in the header.`);
			this.map = mapped;
			return;
		}
		// Why does the header not fit? Another delimiter, the other kind of file, or not a CSV at all.
		const joined = cells.join(',');
		for (const [d, name] of DELIMS) {
			const parts = joined.split(d).map(normHeader);
			if (parts.length > 1 && REQUIRED[this.kind].filter((c) => parts.includes(c) || parts.some((p) => ALIASES[p] === c)).length >= 2) {
				return this.fileError(`This file separates columns with ${name}, not commas. Save it as “CSV (comma delimited)” and upload it again.`);
			}
		}
		for (const other of (['tests', 'norms', 'tables', 'equations'] as CsvKind[]).filter((k) => k !== this.kind)) {
			if (REQUIRED[other].every((c) => names.includes(c) || names.some((n) => ALIASES[n] === c))) {
				return this.fileError(`This looks like a file of ${KIND_NAMES[other]}, not ${KIND_NAMES[this.kind]}. Choose the other kind of upload.`);
			}
		}
		// eslint-disable-next-line no-control-regex -- control characters are what this looks for (binary data)
		if (/[\u0000-\u0008\u000e-\u001f\ufffd]/.test(joined)) {
			return this.fileError('This does not look like a text CSV file (it holds binary data). Upload the CSV exported from your spreadsheet.');
		}
		if (present.size === 0) {
			return this.fileError(
				`The first line is not a header Crosstally knows. Expected the columns ${cols.join(', ')} (required: ${REQUIRED[this.kind].join(', ')}); found ${clip(cells.slice(0, 6).join(', '), 120)}.`
			);
		}
		this.fileError(`Missing column${missing.length > 1 ? 's' : ''}: ${missing.join(', ')}. The header needs ${REQUIRED[this.kind].join(', ')}.`);
	}

	private num(line: number, v: Record<string, string>, col: string, opts: { required?: boolean; int?: boolean } = {}): number | null | undefined {
		const s = v[col];
		if (s === undefined || s === '') {
			if (opts.required) this.err(line, col, `${col}: missing value`);
			return opts.required ? undefined : null;
		}
		if (!NUMBER_RE.test(s)) {
			this.err(line, col, `${col}: "${clip(s)}" is not a number${/^\d+,\d+$/.test(s) ? ' (use a dot for decimals)' : ''}`);
			return undefined;
		}
		const n = Number(s);
		if (opts.int && !Number.isInteger(n)) {
			this.err(line, col, `${col}: "${s}" is not a whole number`);
			return undefined;
		}
		return n;
	}

	/** The group's columns shared by every norm kind; `ok` when they read well. */
	private groupKeys(line: number, v: Record<string, string>, allowComposite: boolean) {
		const before = this.result.errorCount;
		const test = v.test_code ?? '';
		const group = v.group_code ?? '';
		const known = this.ctx.testCodes.has(test) || (allowComposite && this.ctx.spans?.[test]?.subject === 'composite');
		if (!test) this.err(line, 'test_code', 'test_code: missing value');
		else if (!known) this.err(line, 'test_code', `test_code: unknown ${allowComposite ? 'test or composite' : 'test'} code "${clip(test)}"`);
		if (!group) this.err(line, 'group_code', 'group_code: missing value');
		else if (!/^[A-Za-z0-9][A-Za-z0-9._-]{0,39}$/.test(group))
			this.err(line, 'group_code', `group_code: "${clip(group)}" — use 1–40 letters, digits, dot, hyphen, underscore`);
		const min = this.num(line, v, 'age_min_months', { required: true, int: true });
		const max = this.num(line, v, 'age_max_months', { required: true, int: true });
		for (const [c, x] of [
			['age_min_months', min],
			['age_max_months', max]
		] as const) {
			if (typeof x === 'number' && (x < 0 || x > MAX_AGE_MONTHS)) this.err(line, c, `${c}: ${x} is outside 0–${MAX_AGE_MONTHS} months`);
		}
		if (typeof min === 'number' && typeof max === 'number' && min > max)
			this.err(line, 'age_max_months', `Age range reversed: ${min}–${max} months (the upper age is below the lower)`);
		let sex: 'F' | 'M' | null = null;
		const sx = (v.sex ?? '').toUpperCase();
		if (sx === 'F' || sx === 'M') sex = sx;
		else if (sx !== '') this.err(line, 'sex', `sex: "${clip(v.sex)}" — use F, M or leave empty`);
		const eMin = this.num(line, v, 'edu_min', { int: true });
		const eMax = this.num(line, v, 'edu_max', { int: true });
		if ((eMin === null) !== (eMax === null) && eMin !== undefined && eMax !== undefined)
			this.err(line, eMin === null ? 'edu_min' : 'edu_max', 'Give both edu_min and edu_max, or neither');
		else if (typeof eMin === 'number' && typeof eMax === 'number') {
			if (eMin > eMax) this.err(line, 'edu_max', `Education range reversed: ${eMin}–${eMax} years`);
			if (eMin < 0 || eMax > 40) this.err(line, 'edu_min', 'Education years must lie within 0–40');
		}
		const keys = {
			test_code: test,
			group_code: group,
			age_min_months: min as number,
			age_max_months: max as number,
			sex,
			edu_min: (eMin as number | null) ?? null,
			edu_max: (eMax as number | null) ?? null
		};
		return { keys, ok: this.result.errorCount === before };
	}

	private tableRow(line: number, v: Record<string, string>): void {
		const before = this.result.errorCount;
		const { keys, ok } = this.groupKeys(line, v, true);
		const scale = (v.scale ?? '').toLowerCase() as TableScale;
		if (!TABLE_SCALES.includes(scale)) this.err(line, 'scale', v.scale ? `scale: "${clip(v.scale)}" — use ${TABLE_SCALES.join(', ')}` : 'scale: missing value');
		const lo = this.num(line, v, 'raw_lo', { required: true });
		const hi = this.num(line, v, 'raw_hi', { required: true });
		const score = this.num(line, v, 'score', { int: true });
		if (TABLE_SCALES.includes(scale) && scale !== 'percentile' && score === null) this.err(line, 'score', 'score: missing value');
		const key = `${keys.test_code}|${keys.group_code}`;
		const keysText = `${keys.age_min_months}|${keys.age_max_months}|${keys.sex}|${keys.edu_min}|${keys.edu_max}|${scale}`;
		let t = this.tables.get(key);
		if (ok && keys.test_code && keys.group_code) {
			if (!t) {
				const group: NormGroupInput & { line: number } = {
					line,
					...keys,
					subject: this.ctx.spans?.[keys.test_code]?.subject ?? 'test',
					form: 'table',
					scale: TABLE_SCALES.includes(scale) ? scale : null,
					rows: [],
					mean: null,
					sd: null,
					n: null,
					intercept: null,
					coefficients: null
				};
				t = { group, lines: [], keysText, bad: false };
				this.tables.set(key, t);
				this.ranges.push({ label: `line ${line}`, ...keys });
			} else if (t.keysText !== keysText) {
				this.err(
					line,
					'age_min_months',
					`Group ${keys.group_code} of ${keys.test_code} has other ages, keys or scale here than on line ${t.group.line}; every row of one table repeats the same group columns`
				);
			}
		}
		if (!t) return;
		if (this.result.errorCount > before) {
			t.bad = true; // its coverage is not checked (a missing row would read as a gap)
			return;
		}
		t.group.rows!.push({
			lo: lo as number,
			hi: hi as number,
			score: scale === 'percentile' ? null : (score as number | null),
			percentile: v.percentile ? v.percentile : null
		});
		t.lines.push(line);
	}

	private equationRow(line: number, v: Record<string, string>): void {
		const before = this.result.errorCount;
		const { keys, ok } = this.groupKeys(line, v, false);
		if (ok) this.ranges.push({ label: `line ${line}`, ...keys });
		const intercept = this.num(line, v, 'intercept', { required: true });
		const coefficients: Record<string, number> = {};
		for (const [col, cov] of [
			['b_age', 'age'],
			['b_education', 'education'],
			['b_sex', 'sex']
		] as const) {
			const x = this.num(line, v, col);
			if (typeof x === 'number') coefficients[cov] = x;
		}
		if (this.result.errorCount === before && Object.keys(coefficients).length === 0)
			this.err(line, 'b_age', 'Give at least one coefficient (b_age, b_education or b_sex)');
		const sd = this.num(line, v, 'residual_sd', { required: true });
		if (typeof sd === 'number' && sd <= 0) this.err(line, 'residual_sd', `residual_sd: ${v.residual_sd} — must be above 0`);
		const n = this.num(line, v, 'n', { int: true });
		if (typeof n === 'number' && (n < 1 || n > 10_000_000)) this.err(line, 'n', `n: ${n} — must be 1 to 10,000,000`);
		if (this.result.errorCount > before) return;
		const row: NormGroupInput & { line: number } = {
			line,
			...keys,
			subject: 'test',
			form: 'regression',
			intercept: intercept as number,
			coefficients,
			sd: sd as number,
			n: (n as number | null) ?? null,
			mean: null,
			scale: null,
			rows: null
		};
		if (this.keepRows) (this.rows as (NormGroupInput & { line: number })[]).push(row);
	}

	/** After the last line of a tables file: each table's coverage against its test or composite, errors on the lines of its rows. */
	private finishTables(): void {
		for (const t of this.tables.values()) {
			const g = t.group;
			const span = this.ctx.spans?.[g.test_code];
			if (!span || !g.scale || t.bad) continue;
			if (span.subject === 'test' && g.scale === 'percentile' && span.reported.some((f) => f !== 'percentile'))
				this.err(
					g.line,
					'scale',
					`Group ${g.group_code} of ${g.test_code}: a percentile-only table fits only a test that reports the percentile alone (it reports ${span.reported.join(', ')})`
				);
			if (span.subject === 'composite' && g.scale === 'percentile')
				this.err(g.line, 'scale', `Group ${g.group_code} of ${g.test_code}: a composite table gives a score, not percentiles only`);
			const bounds = g.scale === 'percentile' ? null : (span.bounds?.[g.scale] ?? null);
			for (const p of tableProblems(g.rows as TableRowInput[], span.span, g.scale, bounds, span.subject === 'composite' ? 'sum' : 'raw')) {
				const line = t.lines[Math.max(0, p.row - 1)] ?? g.line;
				const col = p.column === 'lo' ? 'raw_lo' : p.column === 'hi' ? 'raw_hi' : p.column;
				this.err(line, col, `${g.test_code} ${g.group_code}, table ${p.message.charAt(0).toLowerCase()}${p.message.slice(1)}`);
			}
		}
		if (this.keepRows) for (const t of this.tables.values()) (this.rows as (NormGroupInput & { line: number })[]).push(t.group);
	}

	private normRow(line: number, v: Record<string, string>): void {
		const before = this.result.errorCount;
		const { keys, ok: rangeOk } = this.groupKeys(line, v, false);
		const mean = this.num(line, v, 'mean', { required: true });
		const sd = this.num(line, v, 'sd', { required: true });
		if (typeof sd === 'number' && sd <= 0) this.err(line, 'sd', `sd: ${v.sd} — SD must be above 0`);
		for (const [c, x] of [
			['mean', mean],
			['sd', sd]
		] as const)
			if (typeof x === 'number' && Math.abs(x) > 99_999_999) this.err(line, c, `${c}: ${v[c]} is too large`);
		const n = this.num(line, v, 'n', { int: true });
		if (typeof n === 'number' && (n < 1 || n > 10_000_000)) this.err(line, 'n', `n: ${n} — must be 1 to 10,000,000`);
		// A row whose ages and keys read well takes part in the overlap check even if its mean or SD is bad.
		if (rangeOk) this.ranges.push({ label: `line ${line}`, ...keys });
		if (this.result.errorCount > before) return;
		const row = {
			line,
			...keys,
			subject: 'test' as const,
			form: 'mean_sd' as const,
			mean: mean as number,
			sd: sd as number,
			n: (n as number | null) ?? null,
			scale: null,
			rows: null,
			intercept: null,
			coefficients: null
		};
		if (this.keepRows) (this.rows as (NormGroupInput & { line: number })[]).push(row);
	}

	private testRow(line: number, v: Record<string, string>): void {
		const before = this.result.errorCount;
		const code = v.code ?? '';
		if (!code) this.err(line, 'code', 'code: missing value');
		else if (!CODE_RE.test(code)) this.err(line, 'code', `code: "${clip(code)}" — use lower-case letters, digits and hyphens`);
		else {
			const first = this.seenCodes.get(code);
			if (first !== undefined) this.err(line, 'code', `Duplicate row: test ${code} already given on line ${first}`);
			else this.seenCodes.set(code, line);
		}
		const domain = v.domain ?? '';
		if (!domain) this.err(line, 'domain', 'domain: missing value');
		else if (!this.ctx.domains.has(domain)) this.err(line, 'domain', `domain: unknown domain "${clip(domain)}" (known: ${[...this.ctx.domains].join(', ')})`);
		const direction = v.direction ?? '';
		if (!DIRECTIONS.includes(direction as never))
			this.err(line, 'direction', direction ? `direction: "${clip(direction)}" — use higher_better or lower_better` : 'direction: missing value');
		const min = this.num(line, v, 'raw_min', { required: true });
		const max = this.num(line, v, 'raw_max', { required: true });
		const dec = this.num(line, v, 'raw_decimals', { int: true });
		const rel = this.num(line, v, 'reliability');
		const reported = parseReported(v.reported ?? '');
		if (typeof reported === 'string') this.err(line, 'reported', `reported: ${reported}`);
		const bounds = parseBounds(v.bounds ?? '');
		if (typeof bounds === 'string') this.err(line, 'bounds', `bounds: ${bounds}`);
		if (this.result.errorCount > before) return;
		const parsed = testInputSchema.safeParse({
			code,
			name: v.name ?? '',
			domain,
			unit: v.unit || 'points',
			direction,
			raw: { min, max, decimals: dec ?? 0 },
			reported,
			bounds,
			reliability: rel ?? null,
			notes: v.notes || null
		});
		if (!parsed.success) {
			for (const i of parsed.error.issues) {
				const col = colOfPath(i.path.map(String));
				this.err(line, col, `${col ?? 'row'}: ${i.message}`);
			}
			return;
		}
		if (this.keepRows) (this.rows as (TestInput & { line: number })[]).push({ ...parsed.data, line });
	}

	/** After the last record: the checks that need all rows (age overlaps and gaps, duplicates). */
	finish(): PreviewResult {
		if (!this.stopped) {
			if (this.map === null) this.fileError('The file is empty: no header and no rows.');
			else if (this.result.rowCount === 0) this.fileError('The file has a header but no rows.');
		}
		if (this.kind === 'tables' && !this.stopped) this.finishTables();
		if (this.kind !== 'tests' && !this.stopped) {
			for (const p of rangeProblems(this.ranges)) {
				const line = Number(p.rows[1].replace('line ', ''));
				this.err(line, p.kind === 'duplicate' ? 'group_code' : 'age_min_months', p.message);
			}
			this.result.errors.sort((a, b) => a.line - b.line);
		}
		if (this.result.fileErrors.length) this.rows.length = 0;
		return this.result;
	}
}

function colOfPath(path: string[]): string | null {
	if (path[0] === 'raw') return `raw_${path[1] === 'decimals' ? 'decimals' : path[1]}`;
	return path[0] ?? null;
}

function clip(s: string, n = 40): string {
	const t = s.replace(/[\r\n\t]+/g, ' ');
	return t.length > n ? t.slice(0, n - 1) + '…' : t;
}

/** "z standard t" (space, semicolon, comma or bar between). */
export function parseReported(s: string): Derived[] | string {
	const parts = s
		.split(/[\s;,|]+/)
		.filter(Boolean)
		.map((p) => p.toLowerCase());
	if (!parts.length) return 'missing value (list the derived scores, e.g. "standard percentile")';
	const bad = parts.filter((p) => !DERIVED.includes(p as Derived));
	if (bad.length) return `unknown score "${clip(bad[0])}" (use ${DERIVED.join(', ')})`;
	if (new Set(parts).size !== parts.length) return 'a score is listed twice';
	return canonicalReported(parts);
}

/** "t=20..80 standard=55..145" (empty: the default bounds). */
export function parseBounds(s: string): Bounds | null | string {
	const parts = s.split(/[\s;,|]+/).filter(Boolean);
	if (!parts.length) return null;
	const out: Bounds = {};
	for (const p of parts) {
		const m = /^([a-z]+)=([+-]?\d+(?:\.\d+)?)\.\.([+-]?\d+(?:\.\d+)?)$/.exec(p.toLowerCase());
		if (!m || !DERIVED.includes(m[1] as Derived)) return `"${clip(p)}" — write bounds as scale=min..max, e.g. t=20..80`;
		if (out[m[1] as Derived]) return `${m[1]} given twice`;
		out[m[1] as Derived] = [Number(m[2]), Number(m[3])];
	}
	return out;
}

// ---------------------------------------------------------------------------------------------
// Export

/** The catalog's CSV layouts go through the one CSV writer (src/lib/csv.ts). */
export function toCsv(columns: readonly string[], rows: CsvCell[][]): string {
	return writeCsv(columns, rows);
}

export function formatBounds(b: Bounds | null | undefined): string {
	if (!b) return '';
	return DERIVED.filter((d) => b[d])
		.map((d) => `${d}=${b[d]![0]}..${b[d]![1]}`)
		.join(' ');
}

export function testsToCsv(tests: readonly TestInput[]): string {
	return toCsv(
		TEST_COLUMNS,
		tests.map((t) => [
			t.code,
			t.name,
			t.domain,
			t.unit,
			t.direction,
			t.raw.min,
			t.raw.max,
			t.raw.decimals,
			t.reported.join(' '),
			formatBounds(t.bounds),
			t.reliability,
			t.notes
		])
	);
}

type GroupKeys = Pick<NormGroupInput, 'test_code' | 'group_code' | 'age_min_months' | 'age_max_months' | 'sex' | 'edu_min' | 'edu_max'>;

/** Mean/SD groups as the norms CSV (groups in other forms go to their own files). */
export function normGroupsToCsv(groups: readonly (GroupKeys & { mean: number | null; sd: number | null; n: number | null; form?: string })[]): string {
	groups = groups.filter((g) => (g.form ?? 'mean_sd') === 'mean_sd');
	return toCsv(
		NORM_COLUMNS,
		groups.map((g) => [g.test_code, g.group_code, g.age_min_months, g.age_max_months, g.sex, g.edu_min, g.edu_max, g.mean, g.sd, g.n])
	);
}

type GroupRecord = GroupKeys & {
	form?: string;
	scale?: string | null;
	rows?: TableRowInput[] | null;
	intercept?: number | null;
	coefficients?: Record<string, number> | null;
	sd: number | null;
	n: number | null;
};

/** Conversion tables as the tables CSV: one line per row, the group's columns repeated. */
export function normTablesToCsv(groups: readonly GroupRecord[]): string {
	return toCsv(
		TABLE_COLUMNS,
		groups
			.filter((g) => g.form === 'table')
			.flatMap((g) =>
				(g.rows ?? []).map((r) => [
					g.test_code,
					g.group_code,
					g.age_min_months,
					g.age_max_months,
					g.sex,
					g.edu_min,
					g.edu_max,
					g.scale,
					r.lo,
					r.hi,
					r.score,
					r.percentile
				])
			)
	);
}

/** Regression equations as the equations CSV: one line per group. */
export function normEquationsToCsv(groups: readonly GroupRecord[]): string {
	return toCsv(
		EQUATION_COLUMNS,
		groups
			.filter((g) => g.form === 'regression')
			.map((g) => [
				g.test_code,
				g.group_code,
				g.age_min_months,
				g.age_max_months,
				g.sex,
				g.edu_min,
				g.edu_max,
				g.intercept,
				g.coefficients?.age,
				g.coefficients?.education,
				g.coefficients?.sex,
				g.sd,
				g.n
			])
	);
}

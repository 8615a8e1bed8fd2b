/**
 * The one CSV writer of every export (catalog tests and norm groups, the audit reports, a
 * protocol's summary). Pure (papaparse only), so the browser may use it too.
 *
 * Formula injection: a spreadsheet runs a cell that starts with = + - @ (and their full-width
 * forms), and a tab or carriage return at the start is the classic way around naive checks.
 * papaparse's own `escapeFormulae` pattern (`/^[=+\-@\t\r].*$/`) lets through any value holding a
 * line break (`.` does not match one, so `=cmd\n` passes), and a value that only starts with the
 * formula after a leading line break or spaces. Here a value is escaped (a leading `'`, quoted)
 * when, after any leading whitespace including line breaks, it starts with one of those
 * characters, or when it starts with a tab or carriage return — unless the whole value is a plain
 * signed number (`-1.25`, a z-score), which a spreadsheet reads as a number anyway.
 *
 * Comment lines (`# Norms: …`) are written as one quoted-if-needed cell through the same writer, with
 * every control character made a space, so text in them cannot start a new line or a new cell.
 */
import Papa from 'papaparse';

const NUMBER = String.raw`\s*[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\s*`;
const STARTS_AS_FORMULA = String.raw`(?:[\t\r]|\s*[=+\-@\uFF1D\uFF0B\uFF0D\uFF20])`;

/** The pattern handed to papaparse's `escapeFormulae` (no `g` flag: `test` stays stateless). */
export const FORMULA_PATTERN = new RegExp(`^(?!${NUMBER}$)${STARTS_AS_FORMULA}`);

/** Would a spreadsheet read this cell as a formula (or formula-like)? A signed plain number is not. */
export function isFormulaLike(v: string): boolean {
	return FORMULA_PATTERN.test(v);
}

export type CsvCell = string | number | null | undefined;

const OPTIONS = { escapeFormulae: FORMULA_PATTERN, newline: '\r\n', quotes: false } as const;

/** A comment line's text: control characters (line breaks, tabs, bidi controls aside) become spaces. */
function commentText(s: string): string {
	// eslint-disable-next-line no-control-regex -- control characters are what this removes
	return s.replace(/[\u0000-\u001f\u007f-\u009f\u2028\u2029]+/g, ' ').trim();
}

/**
 * The file: a header, one line per row, then any comment lines; CRLF line ends and a final CRLF;
 * `bom` puts a UTF-8 byte-order mark first (spreadsheets then read the file as UTF-8).
 */
export function writeCsv(fields: readonly string[], rows: readonly (readonly CsvCell[])[], opts: { comments?: readonly string[]; bom?: boolean } = {}): string {
	const data = rows.map((r) => r.map((v) => (v === null || v === undefined ? '' : v)));
	let out = Papa.unparse({ fields: [...fields], data }, OPTIONS) + '\r\n';
	if (opts.comments?.length) {
		out += '\r\n';
		for (const c of opts.comments) out += Papa.unparse([[commentText(c)]], OPTIONS) + '\r\n';
	}
	return (opts.bom ? '\ufeff' : '') + out;
}

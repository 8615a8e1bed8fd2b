/**
 * Run a CSV text through papaparse and the validator, record by record. Used by the server on
 * preview and confirm; the browser worker (preview.worker.ts) streams a File through the same
 * validator in chunks.
 */
import Papa from 'papaparse';
import { CsvValidator, LIMITS, formatBytes, type CsvKind, type ParsedRow, type PreviewResult, type ValidationContext } from './csv';

export function byteLength(text: string): number {
	return new TextEncoder().encode(text).length;
}

export function validateCsvText<K extends CsvKind>(
	kind: K,
	text: string,
	ctx: ValidationContext,
	keepRows = false
): { result: PreviewResult; rows: ParsedRow<K>[] } {
	const v = new CsvValidator(kind, ctx, keepRows);
	const size = byteLength(text);
	if (size > LIMITS.maxBytes) {
		v.fileError(`The file is ${formatBytes(size)}; the most one import takes is ${formatBytes(LIMITS.maxBytes)}. Split it into smaller files.`);
		return { result: v.finish(), rows: [] };
	}
	if (text.replace(/^\uFEFF/, '').trim() === '') {
		return { result: v.finish(), rows: [] };
	}
	feedPapa(v, normalizeNewlines(text.replace(/^\uFEFF/, '')));
	return { result: v.finish(), rows: v.rows };
}

/** One line ending throughout (a file pasted together from Windows and Unix parts has both). */
export function normalizeNewlines(text: string): string {
	return text.replace(/\r\n?/g, '\n');
}

function feedPapa(v: CsvValidator<CsvKind>, text: string): void {
	Papa.parse<string[]>(text, {
		delimiter: ',',
		newline: '\n',
		skipEmptyLines: false,
		step: (r, parser) => {
			pushRecord(v, r.data, r.errors);
			if (v.stopped) parser.abort();
		}
	});
}

/** One record from papaparse, with its parse errors (an unclosed quote) turned into row messages. */
export function pushRecord(v: CsvValidator<CsvKind>, cells: string[], errors: Papa.ParseError[] = []): void {
	const quote = errors.find((e) => e.type === 'Quotes');
	if (quote && v.result.columns.length) {
		v.push(cells);
		v.rowProblem('A quoted cell is never closed (a missing ")');
		return;
	}
	v.push(cells);
}

/**
 * The CSV preview off the main thread: reads the File, streams it through papaparse in chunks and
 * the same validator the server uses, and posts progress as it goes, so a 100,000-row file never
 * blocks the page.
 */
import Papa from 'papaparse';
import { CsvValidator, LIMITS, formatBytes, type CsvKind, type PreviewResult, type SubjectSpan } from './csv';
import { normalizeNewlines, pushRecord } from './parse';

export type WorkerRequest = { file: File; kind: CsvKind; testCodes: string[]; domains: string[]; spans?: Record<string, SubjectSpan> };
export type WorkerMessage = { type: 'progress'; done: number; total: number; rows: number } | { type: 'done'; result: PreviewResult; ms: number };

const post = (m: WorkerMessage) => (self as unknown as Worker).postMessage(m);

self.onmessage = async (e: MessageEvent<WorkerRequest>) => {
	const started = performance.now();
	const { file, kind } = e.data;
	const v = new CsvValidator(kind, { testCodes: new Set(e.data.testCodes), domains: new Set(e.data.domains), spans: e.data.spans });
	const done = () => post({ type: 'done', result: v.finish(), ms: Math.round(performance.now() - started) });
	if (file.size > LIMITS.maxBytes) {
		v.fileError(`The file is ${formatBytes(file.size)}; the most one import takes is ${formatBytes(LIMITS.maxBytes)}. Split it into smaller files.`);
		return done();
	}
	const text = normalizeNewlines((await file.text()).replace(/^\uFEFF/, ''));
	if (text.trim() === '') return done();
	Papa.parse<string[]>(text, {
		delimiter: ',',
		newline: '\n',
		skipEmptyLines: false,
		chunkSize: 256 * 1024,
		chunk: (res: Papa.ParseResult<string[]>, parser: Papa.Parser) => {
			const byRow = new Map<number, Papa.ParseError[]>();
			for (const er of res.errors) byRow.set(er.row ?? -1, [...(byRow.get(er.row ?? -1) ?? []), er]);
			for (let i = 0; i < res.data.length; i++) {
				pushRecord(v, res.data[i], byRow.get(i));
				if (v.stopped) break;
			}
			post({ type: 'progress', done: res.meta.cursor, total: text.length, rows: v.result.rowCount });
			if (v.stopped) parser.abort();
		},
		complete: done
	});
};

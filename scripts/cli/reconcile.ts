/**
 * `npm run --silent crosstally -- reconcile < protocol.json`
 *
 * Reads one protocol document (see shared/spec/reconcile.md) or a JSON array of them on standard
 * input and writes the reconciliation result (or an array of results, same order) on standard output.
 *
 * Exit codes: 0 whatever was found; 2 for input that does not fit (one `reconcile: path: message`
 * line per problem on stderr, array elements prefixed with their index, e.g. `[3].norms[0].sd`),
 * and then nothing at all on stdout.
 *
 * Streaming (so a 50 MB array fits in default Node memory): the top-level array is cut into
 * elements by a small tokenizer (tracks strings, escapes and bracket depth), each element is
 * JSON.parsed, validated and reconciled on its own, and its result is spooled. Because bad input
 * anywhere must leave stdout empty, nothing is written until the whole input has been read and
 * validated: results are kept in memory up to SPOOL_MEMORY_LIMIT characters and spill over into a
 * temporary file beyond that; on success the spool is copied to stdout, on failure it is dropped.
 * Memory therefore stays bounded by the largest single element plus the in-memory spool limit.
 * Reading stops at the first bad element.
 */
import type { Readable, Writable } from 'node:stream';
import { once } from 'node:events';
import { closeSync, createReadStream, mkdtempSync, openSync, rmSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parseReconcileInput } from '../../src/lib/scoring/schema';
import { reconcile, ReconcileInputError } from '../../src/lib/scoring/reconcile';
import { formatPath } from '../../src/lib/scoring/schema';

const MAX_ERRORS = 20;
/** Characters of results kept in memory before the spool moves to a temporary file. */
export const SPOOL_MEMORY_LIMIT = 16 * 1024 * 1024;
/** Tests lower the limit to exercise the temporary-file path: CROSSTALLY_SPOOL_LIMIT=<characters>. */
function spoolLimit(): number {
	const v = Number(process.env.CROSSTALLY_SPOOL_LIMIT);
	return Number.isInteger(v) && v >= 0 ? v : SPOOL_MEMORY_LIMIT;
}

class BadInput extends Error {
	constructor(readonly lines: string[]) {
		super(lines[0]);
	}
}

async function write(out: Writable, s: string): Promise<void> {
	if (!out.write(s)) await once(out, 'drain');
}

/** Results held until the whole input is known to be good. */
class Spool {
	private parts: string[] = [];
	private size = 0;
	private dir: string | null = null;
	private file: string | null = null;
	private fd: number | null = null;

	constructor(private readonly memoryLimit: number) {}

	add(s: string): void {
		if (this.fd === null && this.size + s.length > this.memoryLimit) {
			this.dir = mkdtempSync(join(tmpdir(), 'crosstally-reconcile-'));
			this.file = join(this.dir, 'results.json');
			this.fd = openSync(this.file, 'w');
			for (const p of this.parts) writeSync(this.fd, p);
			this.parts = [];
		}
		if (this.fd !== null) writeSync(this.fd, s);
		else {
			this.parts.push(s);
			this.size += s.length;
		}
	}

	async copyTo(out: Writable): Promise<void> {
		if (this.fd === null) {
			for (const p of this.parts) await write(out, p);
			return;
		}
		closeSync(this.fd);
		this.fd = -1;
		for await (const chunk of createReadStream(this.file as string)) await write(out, chunk as unknown as string);
	}

	discard(): void {
		if (this.fd !== null && this.fd >= 0) closeSync(this.fd);
		this.fd = null;
		if (this.dir) rmSync(this.dir, { recursive: true, force: true });
		this.parts = [];
	}
}

/**
 * Cuts the text of a top-level JSON array into the texts of its elements, chunk by chunk.
 * Only strings, escapes and bracket depth are tracked; each element's own syntax is left to JSON.parse.
 */
export class ArraySplitter {
	private depth = 0;
	private inString = false;
	private escape = false;
	private started = false;
	private done = false;
	private parts: string[] = [];
	private count = 0;

	get elements(): number {
		return this.count;
	}

	get closed(): boolean {
		return this.done;
	}

	/** Feed a chunk; calls `onElement(text, index)` for each complete element. */
	push(chunk: string, onElement: (text: string, index: number) => void): void {
		let start = 0;
		const n = chunk.length;
		for (let i = 0; i < n; i++) {
			const c = chunk.charCodeAt(i);
			if (this.inString) {
				if (this.escape) this.escape = false;
				else if (c === 92 /* \ */) this.escape = true;
				else if (c === 34 /* " */) this.inString = false;
				continue;
			}
			if (c === 32 || c === 10 || c === 13 || c === 9) continue;
			if (this.done) throw new BadInput(['input: unexpected text after the closing ] of the array']);
			if (!this.started) {
				if (c !== 91 /* [ */) throw new BadInput(['input: expected a JSON array']);
				this.started = true;
				start = i + 1;
				continue;
			}
			if (c === 34) this.inString = true;
			else if (c === 123 /* { */ || c === 91 /* [ */) this.depth++;
			else if (c === 125 /* } */ || c === 93 /* ] */) {
				if (this.depth === 0) {
					if (c === 125) throw new BadInput([`[${this.count}]: not valid JSON (unexpected })`]);
					this.flush(chunk.slice(start, i), true, onElement);
					this.done = true;
				} else this.depth--;
			} else if (c === 44 /* , */ && this.depth === 0) {
				this.flush(chunk.slice(start, i), false, onElement);
				start = i + 1;
			}
		}
		if (this.started && !this.done && start < n) this.parts.push(chunk.slice(start));
	}

	private flush(tail: string, closing: boolean, onElement: (text: string, index: number) => void): void {
		this.parts.push(tail);
		const text = this.parts.length === 1 ? this.parts[0] : this.parts.join('');
		this.parts = [];
		if (text.trim() === '') {
			if (closing && this.count === 0) return; // []
			throw new BadInput([`[${this.count}]: not valid JSON (missing value)`]);
		}
		onElement(text, this.count++);
	}
}

function jsonError(err: unknown): string {
	return (err instanceof Error ? err.message : String(err)).replace(/\s+/g, ' ').trim();
}

/** Validate and reconcile one parsed document; returns the result or throws BadInput. */
function processDocument(doc: unknown, prefix: string) {
	const parsed = parseReconcileInput(doc, prefix, MAX_ERRORS);
	if (!parsed.ok) throw new BadInput(parsed.errors);
	try {
		return reconcile(parsed.value);
	} catch (err) {
		if (err instanceof ReconcileInputError) throw new BadInput([`${formatPath(err.path, prefix)}: ${err.message}`]);
		throw err;
	}
}

export async function run(input: Readable, output: Writable, errors: Writable): Promise<number> {
	const spool = new Spool(spoolLimit());
	const decoder = new TextDecoder('utf-8');
	try {
		let mode: 'unknown' | 'single' | 'array' = 'unknown';
		const whole: string[] = [];
		const splitter = new ArraySplitter();
		const onElement = (text: string, index: number) => {
			let doc: unknown;
			try {
				doc = JSON.parse(text);
			} catch (err) {
				throw new BadInput([`[${index}]: not valid JSON (${jsonError(err)})`]);
			}
			const result = processDocument(doc, `[${index}]`);
			spool.add((index === 0 ? '[\n' : ',\n') + JSON.stringify(result));
		};
		const feed = (text: string) => {
			if (mode === 'unknown') {
				const m = /\S/.exec(text);
				if (!m) return;
				mode = text[m.index] === '[' ? 'array' : 'single';
			}
			if (mode === 'array') splitter.push(text, onElement);
			else whole.push(text);
		};
		for await (const chunk of input) {
			feed(typeof chunk === 'string' ? chunk : decoder.decode(chunk as Uint8Array, { stream: true }));
		}
		feed(decoder.decode());

		if (mode === 'unknown') throw new BadInput(['input: empty; expected a JSON object or array']);
		if (mode === 'array') {
			if (!splitter.closed) throw new BadInput([`input: the array is not closed (after ${splitter.elements} elements)`]);
			spool.add(splitter.elements === 0 ? '[]\n' : '\n]\n');
		} else {
			let doc: unknown;
			try {
				doc = JSON.parse(whole.join(''));
			} catch (err) {
				throw new BadInput([`input: not valid JSON (${jsonError(err)})`]);
			}
			spool.add(JSON.stringify(processDocument(doc, ''), null, 2) + '\n');
		}
		await spool.copyTo(output);
		return 0;
	} catch (err) {
		if (!(err instanceof BadInput)) throw err;
		const lines = err.lines.slice(0, MAX_ERRORS);
		errors.write(lines.map((l) => `reconcile: ${l}\n`).join(''));
		return 2;
	} finally {
		spool.discard();
	}
}

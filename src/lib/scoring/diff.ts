/** A character diff of two entered values, for the review screen. */
import { diffChars } from 'diff';
import type { Entered } from './scales';

export interface DiffSegment {
	text: string;
	/** `removed`: only in the first value; `added`: only in the second. */
	kind: 'same' | 'added' | 'removed';
}

/** Segments turning `first` into `second`, each value as written (a missing value is empty). */
export function charDiff(first: Entered, second: Entered): DiffSegment[] {
	const a = first === null || first === undefined ? '' : typeof first === 'number' ? String(first) : first;
	const b = second === null || second === undefined ? '' : typeof second === 'number' ? String(second) : second;
	const out: DiffSegment[] = [];
	for (const c of diffChars(a, b)) {
		const kind = c.added ? 'added' : c.removed ? 'removed' : 'same';
		const last = out[out.length - 1];
		if (last && last.kind === kind) last.text += c.value;
		else out.push({ text: c.value, kind });
	}
	return out;
}

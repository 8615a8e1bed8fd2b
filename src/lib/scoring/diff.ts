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
	const push = (text: string, kind: DiffSegment['kind']) => {
		if (!text) return;
		const last = out[out.length - 1];
		if (last && last.kind === kind) last.text += text;
		else out.push({ text, kind });
	};
	// Same length (a swap, one wrong digit, a rounding): compare position by position, so both
	// swapped digits are marked (118 / 181 → 1[18] / 1[81]) rather than one digit "moving".
	if (a.length === b.length && a.length > 0) {
		let i = 0;
		while (i < a.length) {
			let j = i;
			if (a[i] === b[i]) {
				while (j < a.length && a[j] === b[j]) j++;
				push(a.slice(i, j), 'same');
			} else {
				while (j < a.length && a[j] !== b[j]) j++;
				push(a.slice(i, j), 'removed');
				push(b.slice(i, j), 'added');
			}
			i = j;
		}
		return out;
	}
	for (const c of diffChars(a, b)) {
		const kind = c.added ? 'added' : c.removed ? 'removed' : 'same';
		const last = out[out.length - 1];
		if (last && last.kind === kind) last.text += c.value;
		else out.push({ text: c.value, kind });
	}
	return out;
}

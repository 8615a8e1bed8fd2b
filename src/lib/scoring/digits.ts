/**
 * Digit patterns between two written numbers, for the digit kinds of the reconciler.
 *
 * Both numbers are strings as written (see `writtenForm` / `formatReference`). The rules:
 * - the two must have the same sign (a leading `-`; a leading `+` is ignored), otherwise no digit kind;
 * - only digits move, appear or disappear; the decimal point stays where it is: for transposition and
 *   wrong digit both strings have the point at the same index, for a dropped/extra digit the shorter
 *   string is the longer one with one digit character removed (so `1.07` → `1.7` is a dropped digit,
 *   but `1.07` → `107` is not: that is a decimal shift);
 * - two digits are adjacent if nothing but the decimal point lies between them (`12.3`/`13.2`).
 */

export interface Written {
	neg: boolean;
	body: string; // digits and at most one '.'
}

const BODY = /^(?:\d+\.?\d*|\.\d+)$/;

/** Split a written number into sign and body, or null if it is not a plain decimal numeral. */
export function splitWritten(s: string): Written | null {
	let neg = false;
	let body = s;
	const c = body.charCodeAt(0);
	if (c === 45 /* - */) {
		neg = true;
		body = body.slice(1);
	} else if (c === 43 /* + */) {
		body = body.slice(1);
	}
	return BODY.test(body) ? { neg, body } : null;
}

function comparable(a: string, b: string): [string, string] | null {
	const wa = splitWritten(a);
	const wb = splitWritten(b);
	if (!wa || !wb || wa.neg !== wb.neg) return null;
	return [wa.body, wb.body];
}

/** `v` is `r` with two adjacent digits swapped (digits differ; sign and point unmoved). */
export function isTransposition(v: string, r: string): boolean {
	const c = comparable(v, r);
	if (!c) return false;
	const [a, b] = c;
	if (a.length !== b.length || a.indexOf('.') !== b.indexOf('.')) return false;
	const da = a.replace('.', '');
	const db = b.replace('.', '');
	let i = 0;
	while (i < da.length && da[i] === db[i]) i++;
	if (i >= da.length - 1) return false;
	return da[i] === db[i + 1] && da[i + 1] === db[i] && da.slice(i + 2) === db.slice(i + 2);
}

/** `v` is `r` with one digit left out (the decimal point is not a digit and stays). */
export function isDigitDrop(v: string, r: string): boolean {
	const c = comparable(v, r);
	if (!c) return false;
	const [a, b] = c;
	if (a.length !== b.length - 1) return false;
	for (let i = 0; i < b.length; i++) {
		if (b[i] === '.') continue;
		if (b.slice(0, i) + b.slice(i + 1) === a) return true;
	}
	return false;
}

/** `v` is `r` with one digit added. */
export function isDigitExtra(v: string, r: string): boolean {
	return isDigitDrop(r, v);
}

/** Same number of digits, point in the same place, exactly one digit differs. */
export function isWrongDigit(v: string, r: string): boolean {
	const c = comparable(v, r);
	if (!c) return false;
	const [a, b] = c;
	if (a.length !== b.length || a.indexOf('.') !== b.indexOf('.')) return false;
	let diffs = 0;
	for (let i = 0; i < a.length; i++) if (a[i] !== b[i] && ++diffs > 1) return false;
	return diffs === 1;
}

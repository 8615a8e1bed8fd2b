/**
 * `npm run --silent crosstally -- agreement < input.json`
 *
 * Reads one JSON object with any of the keys `kappa`, `icc`, `bland_altman` (see
 * src/lib/scoring/AGREEMENT.md and issue 7) and writes one JSON object with the same keys:
 *
 *   kappa:        {"kappa": k | null, "observed": po, "expected": pe, "n": n}
 *   icc:          {"ICC(1,1)": …, "ICC(2,1)": …, "ICC(3,1)": …, "ICC(1,k)": …, "ICC(2,k)": …, "ICC(3,k)": …}
 *   bland_altman: {"bias": …, "sd": …, "lower": …, "upper": …, "n": …}
 *
 * Exit codes: 0 success (a null statistic is explained by a `note:` line on stderr);
 * 2 bad input (one `path: message` line per problem on stderr, nothing on stdout).
 * Unknown keys, at the top level or inside a section, are bad input.
 */
import type { Readable, Writable } from 'node:stream';
import { AgreementInputError, blandAltman, cohenKappa, intraclassCorrelation } from '../../src/lib/scoring/agreement';
import { parseAgreementInput } from '../../src/lib/scoring/agreement-schema';

/** At most this many problems are listed; the rest are counted. */
const MAX_ERRORS = 20;

async function readAll(input: Readable): Promise<string> {
	const chunks: Buffer[] = [];
	for await (const chunk of input) {
		chunks.push(typeof chunk === 'string' ? Buffer.from(chunk) : (chunk as Buffer));
	}
	return Buffer.concat(chunks).toString('utf8');
}

function fail(errors: Writable, lines: string[]): number {
	const shown = lines.slice(0, MAX_ERRORS);
	if (lines.length > MAX_ERRORS) shown.push(`… and ${lines.length - MAX_ERRORS} more problems`);
	errors.write(shown.map((line) => `agreement: ${line}\n`).join(''));
	return 2;
}

export async function run(input: Readable, output: Writable, errors: Writable): Promise<number> {
	const text = await readAll(input);
	if (text.trim() === '') return fail(errors, ['input: empty; expected one JSON object']);

	let raw: unknown;
	try {
		raw = JSON.parse(text);
	} catch (err) {
		const detail = (err instanceof Error ? err.message : String(err)).replace(/\s+/g, ' ').trim();
		return fail(errors, [`input: not valid JSON (${detail})`]);
	}

	const parsed = parseAgreementInput(raw);
	if (!parsed.success) return fail(errors, parsed.errors);
	const data = parsed.data;

	const result: Record<string, unknown> = {};
	const notes: string[] = [];
	const problems: string[] = [];
	// The schema should already have rejected everything the statistics reject; this is a
	// second line of defence, still reported as bad input with its full path.
	const section = (name: string, compute: () => unknown) => {
		try {
			result[name] = compute();
		} catch (err) {
			if (!(err instanceof AgreementInputError)) throw err;
			problems.push(`${name}.${err.message}`);
		}
	};

	if (data.kappa) {
		const { pairs, weights, categories } = data.kappa;
		section('kappa', () => {
			const k = cohenKappa(pairs, { weights: weights ?? 'none', categories });
			if (k.undefinedReason) notes.push(`kappa.kappa is null: ${k.undefinedReason}`);
			return { kappa: k.kappa, observed: k.observed, expected: k.expected, n: k.n };
		});
	}
	if (data.icc) {
		const { ratings } = data.icc;
		section('icc', () => {
			const icc = intraclassCorrelation(ratings);
			if (icc.undefinedReason) notes.push(`icc: ${icc.undefinedReason}`);
			return icc.icc;
		});
	}
	if (data.bland_altman) {
		const { pairs } = data.bland_altman;
		section('bland_altman', () => {
			const ba = blandAltman(pairs);
			return { bias: ba.bias, sd: ba.sd, lower: ba.lower, upper: ba.upper, n: ba.n };
		});
	}
	if (problems.length > 0) return fail(errors, problems);

	output.write(`${JSON.stringify(result)}\n`);
	for (const note of notes) errors.write(`agreement: note: ${note}\n`);
	return 0;
}

/**
 * Published data sets and helpers shared by the agreement tests (agreement.test.ts,
 * agreement-counts.test.ts, agreement-cli.test.ts, fuzz-cli.test.ts). Inputs only: every expected
 * figure stays written in its test, with its source or its hand-worked arithmetic.
 */
import { AgreementInputError } from '../../src/lib/scoring/agreement';

/** The AgreementInputError `fn` throws (anything else thrown, or nothing, fails the test). */
export function thrown(fn: () => unknown): AgreementInputError {
	try {
		fn();
	} catch (err) {
		if (err instanceof AgreementInputError) return err;
		throw err;
	}
	throw new Error('expected an AgreementInputError');
}

/** Expand a contingency table (rows: rater 1, columns: rater 2) into label pairs. */
export function pairsFromTable(table: number[][], categories: string[]): [string, string][] {
	const pairs: [string, string][] = [];
	table.forEach((row, i) =>
		row.forEach((count, j) => {
			for (let c = 0; c < count; c++) pairs.push([categories[i], categories[j]]);
		})
	);
	return pairs;
}

/**
 * Shrout PE, Fleiss JL. Intraclass correlations: uses in assessing rater reliability. Psychological
 * Bulletin 1979;86(2):420–428, Table 2: 6 targets (rows) rated by 4 judges (columns).
 */
export const SHROUT_FLEISS = [
	[9, 2, 5, 8],
	[6, 1, 3, 2],
	[8, 4, 6, 8],
	[7, 1, 2, 6],
	[10, 5, 6, 9],
	[6, 2, 4, 7]
];

/**
 * Bland JM, Altman DG. Lancet 1986;i(8476):307–310: PEFR (l/min) of 17 subjects, first reading with
 * the large Wright meter and with the mini Wright meter (as shipped in the R package BlandAltmanLeh,
 * bland.altman.PEFR, columns bigger.first and smaller.first).
 */
export const PEFR_WRIGHT = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427];
export const PEFR_MINI = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451];

/**
 * Gwet KL. Handbook of Inter-Rater Reliability, 4th ed. (2014): 100 pregnant women by type and
 * abstractor (rows: abstractor 1), as shipped in the R package irrCAC (dataset cont3x3abstractors).
 */
export const GWET_ABSTRACTORS = {
	categories: ['Ectopic', 'AIU', 'NIU'],
	table: [
		[13, 0, 0],
		[0, 20, 7],
		[0, 4, 56]
	]
};

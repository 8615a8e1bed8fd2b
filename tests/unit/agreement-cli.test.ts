/**
 * The `agreement` batch command, called in process as scripts/crosstally.ts calls it: JSON on
 * stdin, JSON on stdout, exit codes and stderr messages (the real command line: scoring-cli.test.ts).
 */
import { describe, expect, it } from 'vitest';
import { runCommand } from '../helpers/cli';
import { GWET_ABSTRACTORS, PEFR_MINI, PEFR_WRIGHT, SHROUT_FLEISS, pairsFromTable } from './agreement-fixtures';

const runAgreement = (stdin: string) => runCommand('agreement', stdin);

const json = (value: unknown) => JSON.stringify(value);

// Shrout & Fleiss (1979), Table 2; Bland & Altman (1986): first Wright and first mini Wright PEFR readings.
const SF = SHROUT_FLEISS;
const WRIGHT = PEFR_WRIGHT;
const MINI = PEFR_MINI;
// Gwet (2014) cont3x3abstractors as label pairs (rows: abstractor 1).
const gwetPairs = () => pairsFromTable(GWET_ABSTRACTORS.table, GWET_ABSTRACTORS.categories);

describe('crosstally agreement (child process)', () => {
	it('answers all three keys for a good input, and only those keys', async () => {
		const out = await runAgreement(
			json({
				kappa: { pairs: gwetPairs(), weights: 'quadratic', categories: ['Ectopic', 'AIU', 'NIU'] },
				icc: { ratings: SF },
				bland_altman: { pairs: WRIGHT.map((w, i) => [w, MINI[i]]) }
			})
		);
		expect(out.stderr).toBe('');
		expect(out.code).toBe(0);
		const result = JSON.parse(out.stdout);
		expect(Object.keys(result).sort()).toEqual(['bland_altman', 'icc', 'kappa']);

		expect(Object.keys(result.kappa).sort()).toEqual(['expected', 'kappa', 'n', 'observed']);
		expect(result.kappa.n).toBe(100);
		expect(result.kappa.kappa).toBeCloseTo(0.8921569, 7); // Gwet 2014 via irrCAC docs
		expect(result.kappa.kappa).toBeCloseTo((result.kappa.observed - result.kappa.expected) / (1 - result.kappa.expected), 12);

		expect(Object.keys(result.icc)).toEqual(['ICC(1,1)', 'ICC(2,1)', 'ICC(3,1)', 'ICC(1,k)', 'ICC(2,k)', 'ICC(3,k)']);
		const published = [0.17, 0.29, 0.71, 0.44, 0.62, 0.91]; // Shrout & Fleiss 1979
		Object.values(result.icc).forEach((v, i) => expect((v as number).toFixed(2)).toBe(published[i].toFixed(2)));

		expect(Object.keys(result.bland_altman).sort()).toEqual(['bias', 'lower', 'n', 'sd', 'upper']);
		expect(result.bland_altman.n).toBe(17);
		expect(result.bland_altman.bias).toBeCloseTo(-36 / 17, 12);
		expect(result.bland_altman.sd.toFixed(1)).toBe('38.8');
		expect(result.bland_altman.lower).toBeCloseTo(result.bland_altman.bias - 1.96 * result.bland_altman.sd, 12);
		expect(result.bland_altman.upper).toBeCloseTo(result.bland_altman.bias + 1.96 * result.bland_altman.sd, 12);
	});

	it('answers each key on its own', async () => {
		const [kappa, icc, ba] = await Promise.all([
			runAgreement(
				json({
					kappa: {
						pairs: [
							['a', 'a'],
							['a', 'b'],
							['b', 'b'],
							['b', 'b']
						]
					}
				})
			),
			runAgreement(
				json({
					icc: {
						ratings: [
							[1, 2],
							[2, 3],
							[3, 5]
						]
					}
				})
			),
			runAgreement(
				json({
					bland_altman: {
						pairs: [
							[1, 2],
							[3, 3],
							[5, 4]
						]
					}
				})
			)
		]);

		expect(kappa.code).toBe(0);
		// By hand: pₒ = 3/4; marginals rater 1 (2, 2), rater 2 (1, 3): pₑ = (2·1 + 2·3)/16 = .5;
		// κ = (.75 − .5)/.5 = .5.
		expect(JSON.parse(kappa.stdout)).toEqual({ kappa: { kappa: 0.5, observed: 0.75, expected: 0.5, n: 4 } });

		expect(icc.code).toBe(0);
		const iccOut = JSON.parse(icc.stdout);
		expect(Object.keys(iccOut)).toEqual(['icc']);
		expect(iccOut.icc['ICC(3,1)']).toBeGreaterThan(0.8);

		expect(ba.code).toBe(0);
		expect(JSON.parse(ba.stdout)).toEqual({ bland_altman: { bias: 0, sd: 1, lower: -1.96, upper: 1.96, n: 3 } });
	});

	it('linear and unweighted kappa with categories; null kappa with a note when pe = 1', async () => {
		const [linear, degenerate] = await Promise.all([
			runAgreement(json({ kappa: { pairs: gwetPairs(), weights: 'linear', categories: ['Ectopic', 'AIU', 'NIU'] } })),
			runAgreement(
				json({
					kappa: {
						pairs: [
							['x', 'x'],
							['x', 'x']
						]
					}
				})
			)
		]);
		expect(linear.code).toBe(0);
		expect(JSON.parse(linear.stdout).kappa.kappa.toFixed(3)).toBe('0.843');

		expect(degenerate.code).toBe(0);
		expect(JSON.parse(degenerate.stdout)).toEqual({ kappa: { kappa: null, observed: 1, expected: 1, n: 2 } });
		expect(degenerate.stderr).toMatch(/note: kappa\.kappa is null: chance agreement is 1/);
	});

	const bad: Array<[string, string, RegExp]> = [
		['not JSON', '{"icc": ', /input: not valid JSON/],
		['empty input', '', /input: empty/],
		['a JSON array', '[1, 2]', /input: expected an object, got an array/],
		['no known key', '{}', /input: expected at least one of kappa, icc, bland_altman/],
		['an unknown top-level key', json({ kapa: { pairs: [['a', 'b']] } }), /kapa: unknown key/],
		['an unknown nested key', json({ icc: { ratings: SF, model: 'twoway' } }), /icc\.model: unknown key/],
		['weights without categories', json({ kappa: { pairs: [['a', 'b']], weights: 'quadratic' } }), /kappa\.categories: required with quadratic weights/],
		[
			'a label not in categories',
			json({
				kappa: {
					pairs: [
						['a', 'b'],
						['a', 'q']
					],
					weights: 'linear',
					categories: ['a', 'b']
				}
			}),
			/kappa\.pairs\[1\]\[1\]: label "q" is not in kappa\.categories/
		],
		['an unknown weighting', json({ kappa: { pairs: [['a', 'b']], weights: 'cubic' } }), /kappa\.weights: expected one of "none", "linear", "quadratic"/],
		['a numeric label', json({ kappa: { pairs: [['a', 3]] } }), /kappa\.pairs\[0\]\[1\]: expected a string, got a number/],
		['a pair of three', json({ kappa: { pairs: [['a', 'b', 'c']] } }), /kappa\.pairs\[0\]: expected a pair of two labels/],
		[
			'a missing ICC rating',
			json({
				icc: {
					ratings: [
						[1, 2],
						[3, 4],
						[5, null]
					]
				}
			}),
			/icc\.ratings\[2\]\[1\]: expected a number, got null/
		],
		[
			'ragged ICC rows',
			json({
				icc: {
					ratings: [
						[1, 2, 3],
						[4, 5, 6],
						[7, 8]
					]
				}
			}),
			/icc\.ratings\[2\]: expected 3 ratings like row 0, got 2/
		],
		['fewer than 2 ICC rows', json({ icc: { ratings: [[1, 2]] } }), /icc\.ratings: expected at least 2 rows/],
		['a single rater', json({ icc: { ratings: [[1], [2]] } }), /icc\.ratings\[0\]: expected at least 2 ratings/],
		['ratings not an array', json({ icc: { ratings: 'lots' } }), /icc\.ratings: expected an array, got a string/],
		['one Bland–Altman pair', json({ bland_altman: { pairs: [[1, 2]] } }), /bland_altman\.pairs: expected at least 2 pairs, got 1/],
		[
			'a string measurement',
			json({
				bland_altman: {
					pairs: [
						[1, 2],
						['3', 4]
					]
				}
			}),
			/bland_altman\.pairs\[1\]\[0\]: expected a number, got a string/
		]
	];

	it.each(bad)('rejects %s: exit 2, the path on stderr, nothing on stdout', async (_name, stdin, message) => {
		const out = await runAgreement(stdin);
		expect(out.code).toBe(2);
		expect(out.stdout).toBe('');
		expect(out.stderr).toMatch(message);
	});

	it('rejects a bad section even when the other sections are good (all or nothing)', async () => {
		const out = await runAgreement(
			json({
				icc: { ratings: SF },
				bland_altman: {
					pairs: [
						[1, 'x'],
						[2, 3]
					]
				}
			})
		);
		expect(out.code).toBe(2);
		expect(out.stdout).toBe('');
		expect(out.stderr).toMatch(/bland_altman\.pairs\[0\]\[1\]: expected a number/);
	});

	it('lists every problem, one per line', async () => {
		const out = await runAgreement(
			json({
				icc: {
					ratings: [
						[1, 'a'],
						[null, 2]
					]
				},
				extra: true
			})
		);
		expect(out.code).toBe(2);
		const lines = out.stderr.trim().split('\n');
		expect(lines).toEqual(
			expect.arrayContaining([
				expect.stringMatching(/icc\.ratings\[0\]\[1\]: expected a number/),
				expect.stringMatching(/icc\.ratings\[1\]\[0\]: expected a number, got null/),
				expect.stringMatching(/extra: unknown key/)
			])
		);
	});
});

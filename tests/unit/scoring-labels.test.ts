import { describe, expect, it } from 'vitest';
import { AACN_2020, TRADITIONAL_INTELLIGENCE, labelFor, parseEntered, referenceScore, type LabelledField } from '../../src/lib/scoring';

// Guilmette et al. (2020), AACN consensus statement on uniform labeling, The Clinical Neuropsychologist 34(3):
// seven bands; boundaries checked from both sides for every scale.
const AACN_BOUNDARIES: Record<LabelledField, [number, string][]> = {
	standard: [
		[130, 'exceptionally_high'],
		[129, 'above_average'],
		[120, 'above_average'],
		[119, 'high_average'],
		[110, 'high_average'],
		[109, 'average'],
		[90, 'average'],
		[89, 'low_average'],
		[80, 'low_average'],
		[79, 'below_average'],
		[70, 'below_average'],
		[69, 'exceptionally_low'],
		[40, 'exceptionally_low'],
		[160, 'exceptionally_high']
	],
	t: [
		[70, 'exceptionally_high'],
		[69, 'above_average'],
		[63, 'above_average'],
		[62, 'high_average'],
		[57, 'high_average'],
		[56, 'average'],
		[43, 'average'],
		[42, 'low_average'],
		[37, 'low_average'],
		[36, 'below_average'],
		[30, 'below_average'],
		[29, 'exceptionally_low'],
		[20, 'exceptionally_low'],
		[80, 'exceptionally_high']
	],
	percentile: [
		[98, 'exceptionally_high'],
		[97, 'above_average'],
		[91, 'above_average'],
		[90, 'high_average'],
		[75, 'high_average'],
		[74, 'average'],
		[25, 'average'],
		[24, 'low_average'],
		[9, 'low_average'],
		[8, 'below_average'],
		[2, 'below_average'],
		[1, 'exceptionally_low'],
		[99, 'exceptionally_high']
	],
	// derived: scaled s ↔ standard 100 + 5(s − 10) (see labels.ts)
	scaled: [
		[16, 'exceptionally_high'],
		[15, 'above_average'],
		[14, 'above_average'],
		[13, 'high_average'],
		[12, 'high_average'],
		[11, 'average'],
		[8, 'average'],
		[7, 'low_average'],
		[6, 'low_average'],
		[5, 'below_average'],
		[4, 'below_average'],
		[3, 'exceptionally_low'],
		[1, 'exceptionally_low'],
		[19, 'exceptionally_high']
	]
};

describe('AACN 2020 bands at every boundary (Guilmette et al., 2020)', () => {
	for (const [field, cases] of Object.entries(AACN_BOUNDARIES) as [LabelledField, [number, string][]][]) {
		for (const [v, id] of cases) {
			it(`${field} ${v} → ${id} (Guilmette et al., 2020${field === 'scaled' ? '; scaled bands derived' : ''})`, () => {
				expect(labelFor(field, v).id).toBe(id);
			});
		}
	}
	it('uses the seven AACN names', () => {
		expect(AACN_2020.bands.standard.map((b) => b.label)).toEqual([
			'Exceptionally high',
			'Above average',
			'High average',
			'Average',
			'Low average',
			'Below average',
			'Exceptionally low'
		]);
	});
});

describe('rounding edges: label on the reported score or rounded percentile, never the unrounded CDF', () => {
	it('standard 130 is the 97.72nd percentile, reported 98: exceptionally high on both (issue 3)', () => {
		const z = (130 - 100) / 15;
		expect(referenceScore('percentile', z)).toBe(98);
		expect(labelFor('percentile', referenceScore('percentile', z)).id).toBe('exceptionally_high');
		expect(labelFor('standard', 130).id).toBe('exceptionally_high');
	});
	it('an unrounded score is rounded half away from zero before labelling', () => {
		expect(labelFor('standard', 129.5).id).toBe('exceptionally_high');
		expect(labelFor('standard', 129.49999999999997).id).toBe('exceptionally_high'); // within the 1e-9 tie tolerance
		expect(labelFor('standard', 129.49).id).toBe('above_average');
		expect(labelFor('t', 62.5).id).toBe('above_average');
		expect(labelFor('percentile', 97.5).id).toBe('exceptionally_high');
		expect(labelFor('percentile', 97.49).id).toBe('above_average');
	});
	it('percentiles "<1" and ">99" label as 1 and 99', () => {
		expect(labelFor('percentile', parseEntered('<1', 'percentile') as number).id).toBe('exceptionally_low');
		expect(labelFor('percentile', parseEntered('>99', 'percentile') as number).id).toBe('exceptionally_high');
	});
	it('z is labelled through its standard-score equivalent: z 2.00 → 130, z 1.99 → 129.85 → 130, z 1.96 → 129.4 → 129', () => {
		expect(labelFor('z', 2).id).toBe('exceptionally_high');
		expect(labelFor('z', 1.99).id).toBe('exceptionally_high');
		expect(labelFor('z', 1.96).id).toBe('above_average');
		expect(labelFor('z', -2).id).toBe('below_average');
		expect(labelFor('z', -2.01).id).toBe('below_average'); // R(69.85) = 70
		expect(labelFor('z', -2.04).id).toBe('exceptionally_low'); // R(69.4) = 69
	});
	it('T and scaled bands agree with the standard-score band of the same z, at every score on the scale', () => {
		for (let t = 20; t <= 80; t++) {
			const ss = referenceScore('standard', (t - 50) / 10);
			expect(labelFor('t', t).id, `T ${t} ↔ standard ${ss}`).toBe(labelFor('standard', ss).id);
		}
		for (let s = 1; s <= 19; s++) {
			const ss = 100 + 5 * (s - 10);
			expect(labelFor('scaled', s).id, `scaled ${s} ↔ standard ${ss}`).toBe(labelFor('standard', ss).id);
		}
	});
	it('the rounded percentile of every standard score lands in the same band, except standard 68 and 69 (1.64th and 1.94th → 2nd percentile)', () => {
		const differ: number[] = [];
		for (let ss = 40; ss <= 160; ss++) {
			const p = referenceScore('percentile', (ss - 100) / 15);
			if (labelFor('percentile', p).id !== labelFor('standard', ss).id) differ.push(ss);
		}
		expect(differ).toEqual([68, 69]);
	});
});

describe('traditional intelligence-test bands (second scheme)', () => {
	it('same cut points, older names', () => {
		expect(labelFor('standard', 130, TRADITIONAL_INTELLIGENCE).label).toBe('Very superior');
		expect(labelFor('standard', 125, TRADITIONAL_INTELLIGENCE).label).toBe('Superior');
		expect(labelFor('standard', 100, TRADITIONAL_INTELLIGENCE).label).toBe('Average');
		expect(labelFor('standard', 75, TRADITIONAL_INTELLIGENCE).label).toBe('Borderline');
		expect(labelFor('standard', 69, TRADITIONAL_INTELLIGENCE).label).toBe('Extremely low');
		expect(labelFor('scaled', 4, TRADITIONAL_INTELLIGENCE).label).toBe('Borderline');
	});
	it('names no test or publisher', () => {
		const text = JSON.stringify(TRADITIONAL_INTELLIGENCE);
		expect(text).not.toMatch(/wechsler|wais|wisc|pearson|stanford|binet/i);
	});
});

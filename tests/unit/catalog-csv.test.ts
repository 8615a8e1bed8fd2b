/** Pure catalog validation: age ranges, the CSV validator (norms and tests), export escaping, form conversion. */
import { describe, it, expect } from 'vitest';
import { rangeProblems, type RangeRow } from '../../src/lib/catalog/ranges';
import { validateCsvText } from '../../src/lib/catalog/parse';
import { isFormulaLike, normGroupsToCsv, parseBounds, parseReported, testsToCsv, LIMITS } from '../../src/lib/catalog/csv';
import { formToTestInput, testFormSchema, testInputToForm, testInputSchema } from '../../src/lib/catalog/schema';

const ctx = { testCodes: new Set(['word-recall', 'speeded-match']), domains: new Set(['memory', 'processing-speed']) };
const H = 'test_code,group_code,age_min_months,age_max_months,sex,edu_min,edu_max,mean,sd,n';
const norms = (...rows: string[]) => [H, ...rows].join('\n') + '\n';
const r = (label: string, min: number, max: number, extra: Partial<RangeRow> = {}): RangeRow => ({
	label,
	test_code: 't',
	group_code: label,
	age_min_months: min,
	age_max_months: max,
	sex: null,
	edu_min: null,
	edu_max: null,
	...extra
});

describe('age ranges', () => {
	it('accepts contiguous bands in any order', () => {
		expect(rangeProblems([r('b', 360, 479), r('a', 216, 359), r('c', 480, 599)])).toEqual([]);
	});
	it('names both rows of an overlap', () => {
		const p = rangeProblems([r('a', 216, 359), r('b', 359, 479)]);
		expect(p).toHaveLength(1);
		expect(p[0].kind).toBe('overlap');
		expect(p[0].rows).toEqual(['a', 'b']);
		expect(p[0].message).toContain('216–359');
	});
	it('names both rows of a gap and the uncovered months', () => {
		const p = rangeProblems([r('a', 216, 359), r('b', 362, 479)]);
		expect(p.map((x) => x.kind)).toEqual(['gap']);
		expect(p[0].message).toContain('360–361 months');
	});
	it('checks each set of keys on its own', () => {
		const rows = [
			r('lo1', 216, 359, { edu_min: 0, edu_max: 12 }),
			r('hi1', 216, 359, { edu_min: 13, edu_max: 30 }),
			r('lo2', 360, 479, { edu_min: 0, edu_max: 12 }),
			r('f', 216, 479, { sex: 'F' })
		];
		expect(rangeProblems(rows)).toEqual([]);
		expect(rangeProblems([...rows, r('lo3', 470, 599, { edu_min: 0, edu_max: 12 })]).map((p) => p.kind)).toEqual(['overlap']);
	});
	it('flags a repeated group code as a duplicate', () => {
		expect(rangeProblems([r('a', 0, 10), { ...r('a', 11, 20), label: 'line 3' }]).map((p) => p.kind)).toEqual(['duplicate']);
	});
});

describe('norm table CSV', () => {
	it('reads a good file, with the first rows as parsed', () => {
		const { result, rows } = validateCsvText('norms', norms('word-recall,a30,360,479,,,,24.5,4.2,139', 'word-recall,a40,480,599,,,,22.1,4.6,'), ctx, true);
		expect(result.errorCount).toBe(0);
		expect(result.fileErrors).toEqual([]);
		expect(result.rowCount).toBe(2);
		expect(result.sample[0]).toEqual({ line: 2, values: expect.objectContaining({ test_code: 'word-recall', mean: '24.5' }) });
		expect(rows[1]).toMatchObject({ line: 3, group_code: 'a40', mean: 22.1, sd: 4.6, n: null, sex: null });
	});
	it('names every bad row with its line and what is wrong', () => {
		const { result } = validateCsvText(
			'norms',
			norms(
				'word-recall,a18,216,359,,,,25.8,4.0,1', // 2 ok
				'word-recall,a30,360,479,,,,24.5,0,1', // 3 SD 0
				'word-recall,a40,480,599,,,,abc,4.6,1', // 4 not a number
				'nope,a1,0,10,,,,1,1,1', // 5 unknown test
				'speeded-match,a1,100,50,,,,1,1,1', // 6 reversed
				'word-recall,a30,600,719,,,,1,1,1', // 7 duplicate group
				'word-recall,a60,700,839,,,,=SUM(A1),1,1', // 8 formula; overlaps a50? (none) -> gap from a40
				'speeded-match,b1,0,10,X,,,1,-2,1' // 9 sex, sd
			),
			ctx
		);
		const by = (line: number) =>
			result.errors
				.filter((e) => e.line === line)
				.map((e) => e.message)
				.join(' | ');
		expect(by(2)).toBe('');
		expect(by(3)).toMatch(/SD must be above 0/);
		expect(by(4)).toMatch(/"abc" is not a number/);
		expect(by(5)).toMatch(/unknown test code "nope"/);
		expect(by(6)).toMatch(/Age range reversed/);
		expect(by(7)).toMatch(/Duplicate row: line 7 repeats group a30 of word-recall \(first at line 3\)/);
		expect(by(8)).toMatch(/looks like a spreadsheet formula/);
		expect(by(8)).not.toMatch(/missing value/);
		expect(by(9)).toMatch(/sex: "X"/);
		expect(by(9)).toMatch(/SD must be above 0/);
		expect(result.badLines).toBe(7);
	});
	it('finds overlaps and gaps across rows', () => {
		const { result } = validateCsvText(
			'norms',
			norms('word-recall,a18,216,359,,,,1,1,', 'word-recall,a30,350,479,,,,1,1,', 'word-recall,a50,600,719,,,,1,1,'),
			ctx
		);
		expect(result.errors.map((e) => [e.line, e.message.split(':')[0]])).toEqual([
			[3, 'Age ranges overlap for word-recall'],
			[4, 'Age gap for word-recall']
		]);
		// groups by what they cover (216 = 18 × 12 → 18;0, 359 = 29 × 12 + 11 → 29;11, 350 = 29 × 12 + 2 → 29;2, 479 → 39;11); the line names the row
		expect(result.errors[0].message).toContain('line 2 (ages 18;0–29;11; 216–359 months) and line 3 (ages 29;2–39;11; 350–479 months)');
	});
	it('reports a missing column before any row', () => {
		const { result } = validateCsvText('norms', 'test_code,group_code,age_min_months,age_max_months,mean\nword-recall,a,0,1,2\n', ctx);
		expect(result.fileErrors[0]).toMatch(/Missing column: sd/);
		expect(result.missingColumns).toEqual(['sd']);
	});
	it('detects a semicolon or tab delimiter and says so', () => {
		expect(validateCsvText('norms', H.replace(/,/g, ';') + '\nword-recall;a;0;1;;;;2;1;\n', ctx).result.fileErrors[0]).toMatch(/semicolons/);
		expect(validateCsvText('norms', H.replace(/,/g, '\t') + '\nword-recall\ta\t0\t1\t\t\t\t2\t1\t\n', ctx).result.fileErrors[0]).toMatch(/tabs/);
	});
	it('handles a BOM, CRLF and quoted cells', () => {
		const { result } = validateCsvText('norms', '\uFEFF' + H + '\r\n"word-recall","a30",360,479,,,,"24.5",4.2,\r\n', ctx);
		expect(result.errorCount).toBe(0);
		expect(result.columns[0].header).toBe('test_code');
	});
	it('treats a quoted newline as part of one row, and names it', () => {
		const { result } = validateCsvText('norms', norms('word-recall,"a\n30",360,479,,,,24.5,4.2,', 'word-recall,a40,480,599,,,,1,1,'), ctx);
		expect(result.rowCount).toBe(2);
		expect(result.errors).toEqual([expect.objectContaining({ line: 2, column: 'group_code' })]);
	});
	it('refuses an empty file, a header-only file, garbage and binary', () => {
		expect(validateCsvText('norms', '', ctx).result.fileErrors[0]).toMatch(/empty/);
		expect(validateCsvText('norms', '\uFEFF  \n', ctx).result.fileErrors[0]).toMatch(/empty/);
		expect(validateCsvText('norms', H + '\n', ctx).result.fileErrors[0]).toMatch(/no rows/);
		expect(validateCsvText('norms', 'lorem ipsum dolor\nsit amet\n', ctx).result.fileErrors[0]).toMatch(/not a header Crosstally knows/);
		const bin = Array.from({ length: 5000 }, (_, i) => String.fromCharCode((i * 7919) % 256)).join('');
		expect(validateCsvText('norms', bin, ctx).result.fileErrors).toHaveLength(1);
	});
	it('refuses a file over the size limit without parsing it', () => {
		const big = H + '\n' + 'x'.repeat(LIMITS.maxBytes);
		const t0 = Date.now();
		expect(validateCsvText('norms', big, ctx).result.fileErrors[0]).toMatch(/the most one import takes is 16\.0 MB/);
		expect(Date.now() - t0).toBeLessThan(2000);
	});
	it('says when a test list is uploaded as a norm table', () => {
		expect(validateCsvText('norms', 'code,name,domain,unit,direction,raw_min,raw_max,raw_decimals,reported\n', ctx).result.fileErrors[0]).toMatch(/test list/);
	});
	it('checks 100,000 rows in well under the time a user waits', () => {
		const rows: string[] = [];
		// 246 sets of keys (2 tests × 3 sexes × 41 education years), each with contiguous 3-month bands.
		for (let i = 0; i < 100_000; i++) {
			const k = i % 246;
			const band = Math.floor(i / 246);
			const test = k % 2 ? 'word-recall' : 'speeded-match';
			const sex = ['', 'F', 'M'][Math.floor(k / 2) % 3];
			const edu = Math.floor(k / 6);
			rows.push(`${test},g${i},${band * 3},${band * 3 + 2},${sex},${edu},${edu},24.5,4.2,100`);
		}
		const t0 = performance.now();
		const { result } = validateCsvText('norms', norms(...rows), ctx);
		const ms = performance.now() - t0;
		expect(result.rowCount).toBe(100_000);
		expect(result.errorCount).toBe(0);
		expect(ms).toBeLessThan(10_000);
	});
});

describe('test list CSV', () => {
	const TH = 'code,name,domain,unit,direction,raw_min,raw_max,raw_decimals,reported,bounds,reliability,notes';
	it('reads reported scores and bounds', () => {
		const { result, rows } = validateCsvText(
			'tests',
			`${TH}\nnew-one,New One,memory,points,higher_better,0,30,0,t z percentile,t=25..75 z=-4..4,0.8,"a note, with comma\nand newline"\n`,
			ctx,
			true
		);
		expect(result.errors).toEqual([]);
		expect(rows[0]).toMatchObject({
			reported: ['z', 't', 'percentile'],
			bounds: { t: [25, 75], z: [-4, 4] },
			reliability: 0.8,
			notes: 'a note, with comma\nand newline'
		});
	});
	it('names bad rows: unknown domain, direction, reported, bounds, duplicates, range', () => {
		const { result } = validateCsvText(
			'tests',
			[
				TH,
				'a,A test,nowhere,points,higher_better,0,10,0,z,,,',
				'b,B test,memory,points,sideways,0,10,0,z,,,',
				'c,C test,memory,points,lower_better,0,10,0,iq,,,',
				'd,D test,memory,points,lower_better,0,10,0,t,t=80..20,,',
				'd,D again,memory,points,lower_better,0,10,0,t,,,',
				'e,E test,memory,points,lower_better,10,5,0,t,,1.5,'
			].join('\n'),
			ctx
		);
		const by = (line: number) =>
			result.errors
				.filter((e) => e.line === line)
				.map((e) => e.message)
				.join(' | ');
		expect(by(2)).toMatch(/unknown domain "nowhere"/);
		expect(by(3)).toMatch(/direction: "sideways"/);
		expect(by(4)).toMatch(/unknown score "iq"/);
		expect(by(5)).toMatch(/lower must be below the upper/);
		expect(by(6)).toMatch(/Duplicate row: test d already given on line 5/);
		expect(by(7)).toMatch(/maximum must be above the minimum/);
		expect(by(7)).toMatch(/reliability: Below 1/);
	});
	it('exports to the layout it reads (round trip), protecting formula-like text', () => {
		const t = testInputSchema.parse({
			code: 'rt',
			name: 'Round, "trip"',
			domain: 'memory',
			unit: 'points',
			direction: 'lower_better',
			raw: { min: -1.5, max: 30, decimals: 1 },
			reported: ['z', 'percentile'],
			bounds: { z: [-4, 4] },
			reliability: 0.75,
			notes: '=not a formula\nsecond line'
		});
		const csv = testsToCsv([t]);
		expect(csv).toContain(`"'=not a formula`);
		const { result, rows } = validateCsvText('tests', csv, ctx, true);
		expect(result.errors).toEqual([]);
		const { line: _l, ...back } = rows[0];
		expect(back).toEqual(t);
		expect(testsToCsv([back])).toBe(csv);
	});
	it('exports norm groups to the layout it reads', () => {
		const g = [
			{
				test_code: 'word-recall',
				group_code: 'a30-e0',
				age_min_months: 360,
				age_max_months: 479,
				sex: 'F' as const,
				edu_min: 0,
				edu_max: 12,
				mean: 24.5,
				sd: 4.2,
				n: 62
			}
		];
		const csv = normGroupsToCsv(g);
		const { rows } = validateCsvText('norms', csv, ctx, true);
		expect(rows.map(({ line: _l, ...x }) => x)).toMatchObject(g); // the parser adds the form fields (form: mean_sd …); every exported field must come back as written
	});
});

describe('small parsers and the form', () => {
	it('tells formulas from signed numbers', () => {
		expect(['=1+1', '@SUM(A1)', '+A1', '-A1', '\tx'].map(isFormulaLike)).toEqual([true, true, true, true, true]);
		expect(['-5', '+2.5', 'abc', '', '3-4'].map(isFormulaLike)).toEqual([false, false, false, false, false]);
	});
	it('parses reported and bounds cells', () => {
		expect(parseReported('percentile;z , t')).toEqual(['z', 't', 'percentile']);
		expect(parseReported('z z')).toMatch(/twice/);
		expect(parseBounds('')).toBeNull();
		expect(parseBounds('t=20..80')).toEqual({ t: [20, 80] });
		expect(parseBounds('t:20-80')).toMatch(/scale=min\.\.max/);
	});
	it('converts the flat form to a test and back', () => {
		const f = testFormSchema.parse({
			code: 'x1',
			name: 'X one',
			domain: 'memory',
			unit: 's',
			direction: 'lower_better',
			raw_min: 0,
			raw_max: 300,
			raw_decimals: 1,
			reported: ['t', 'z'],
			t_min: 20,
			t_max: 80,
			reliability: 0.9,
			notes: ''
		});
		const t = formToTestInput(f);
		expect(t).toMatchObject({ reported: ['z', 't'], bounds: { t: [20, 80] }, notes: null, raw: { min: 0, max: 300, decimals: 1 } });
		expect(formToTestInput(testInputToForm(t))).toEqual(t);
	});
	it('gives field messages for half-given or inverted bounds', () => {
		const p = testFormSchema.safeParse({
			code: 'x1',
			name: 'X one',
			domain: 'memory',
			unit: 's',
			direction: 'lower_better',
			raw_min: 5,
			raw_max: 1,
			raw_decimals: 0,
			reported: [],
			t_min: 20,
			scaled_min: 10,
			scaled_max: 5
		});
		expect(p.success).toBe(false);
		const paths = p.error!.issues.map((i) => i.path.join('.'));
		expect(paths).toEqual(expect.arrayContaining(['raw_max', 'reported', 't_max', 'scaled_max']));
	});
});

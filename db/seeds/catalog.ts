/**
 * The demo catalog: an invented battery of 14 tests across six domains, with one invented norm
 * set. Every name, code, citation and number here is made up for the Crosstally demo; none of it
 * is, or is meant to resemble, a published test or normative sample.
 *
 * `speeded-match` and `word-recall` agree with the worked examples in the reconciliation spec
 * (group a30: speeded-match mean 42.0 SD 6.0; word-recall a30 24.5/4.2, a40 22.1/4.6).
 */
import { exec, transaction } from '../../src/lib/server/db';

export const DEMO_DOMAINS: { code: string; name: string }[] = [
	{ code: 'attention', name: 'Attention' },
	{ code: 'processing-speed', name: 'Processing speed' },
	{ code: 'memory', name: 'Memory' },
	{ code: 'language', name: 'Language' },
	{ code: 'visuospatial', name: 'Visuospatial' },
	{ code: 'executive', name: 'Executive function' }
];

type Field = 'z' | 'standard' | 'scaled' | 't' | 'percentile';

interface DemoTest {
	code: string;
	name: string;
	domain: string;
	unit: string;
	direction: 'higher_better' | 'lower_better';
	raw: [number, number, number]; // min, max, decimals
	reported: Field[];
	bounds?: Partial<Record<Field, [number, number]>>;
	reliability?: number;
	notes?: string;
	/** Mean and SD per age band, in BANDS order. */
	norms: [number, number][];
	/** Education split: norms for 0–12 and 13+ years instead of one row per band. */
	eduNorms?: { low: [number, number][]; high: [number, number][] };
}

/** Age bands in months, inclusive: 18;0–29;11, 30;0–39;11, … 70;0–89;11. */
export const DEMO_BANDS: { code: string; min: number; max: number; n: number }[] = [
	{ code: 'a18', min: 216, max: 359, n: 148 },
	{ code: 'a30', min: 360, max: 479, n: 141 },
	{ code: 'a40', min: 480, max: 599, n: 136 },
	{ code: 'a50', min: 600, max: 719, n: 129 },
	{ code: 'a60', min: 720, max: 839, n: 117 },
	{ code: 'a70', min: 840, max: 1079, n: 94 }
];

export const DEMO_TESTS: DemoTest[] = [
	{
		code: 'number-relay',
		name: 'Number Relay Span',
		domain: 'attention',
		unit: 'points',
		direction: 'higher_better',
		raw: [0, 16, 0],
		reported: ['scaled', 'percentile'],
		reliability: 0.86,
		notes: 'Number strings relayed back in order and in reverse; the two trial sets summed.',
		norms: [
			[10.8, 2.3],
			[10.5, 2.3],
			[10.1, 2.4],
			[9.6, 2.4],
			[9.1, 2.5],
			[8.4, 2.6]
		]
	},
	{
		code: 'tone-vigil',
		name: 'Tone Vigil Omissions',
		domain: 'attention',
		unit: 'errors',
		direction: 'lower_better',
		raw: [0, 60, 0],
		reported: ['t', 'percentile'],
		reliability: 0.78,
		notes: 'Error count: missed target tones over the 11-minute run (one target in seven).',
		norms: [
			[4.1, 3.2],
			[4.4, 3.3],
			[5.0, 3.6],
			[5.9, 4.0],
			[7.2, 4.6],
			[9.0, 5.4]
		]
	},
	{
		code: 'speeded-match',
		name: 'Speeded Figure Match',
		domain: 'processing-speed',
		unit: 'seconds',
		direction: 'lower_better',
		raw: [0, 300, 1],
		reported: ['z', 'standard', 'scaled', 't', 'percentile'],
		bounds: { t: [20, 80] },
		reliability: 0.88,
		notes: 'Timed: seconds to complete the match sheet, to one decimal.',
		norms: [
			[39.5, 5.6],
			[42.0, 6.0],
			[45.3, 6.8],
			[49.8, 7.9],
			[55.6, 9.4],
			[63.2, 11.5]
		]
	},
	{
		code: 'glyph-sort',
		name: 'Glyph Sort',
		domain: 'processing-speed',
		unit: 'items',
		direction: 'higher_better',
		raw: [0, 120, 0],
		reported: ['standard', 'percentile'],
		reliability: 0.9,
		norms: [
			[78.2, 11.4],
			[75.6, 11.2],
			[71.3, 11.5],
			[66.0, 11.9],
			[59.8, 12.4],
			[52.1, 13.0]
		]
	},
	{
		code: 'dot-chase',
		name: 'Dot Chase',
		domain: 'processing-speed',
		unit: 'seconds',
		direction: 'lower_better',
		raw: [0, 180, 1],
		reported: ['z', 't'],
		bounds: { t: [25, 75] },
		reliability: 0.81,
		notes: 'Timed: connect numbered dots in order; discontinue at 180 s.',
		norms: [
			[28.4, 7.9],
			[30.1, 8.4],
			[33.0, 9.2],
			[36.9, 10.5],
			[42.7, 12.6],
			[51.5, 16.0]
		]
	},
	{
		code: 'word-recall',
		name: 'Harbour Word Recall',
		domain: 'memory',
		unit: 'words',
		direction: 'higher_better',
		raw: [0, 40, 0],
		reported: ['z', 'standard', 'scaled', 't', 'percentile'],
		reliability: 0.84,
		notes: 'Sum of four learning trials of a 10-word harbour-errand list.',
		norms: [
			[25.8, 4.0],
			[24.5, 4.2],
			[22.1, 4.6],
			[20.6, 4.8],
			[18.9, 5.0],
			[16.4, 5.3]
		]
	},
	{
		code: 'word-recall-delayed',
		name: 'Harbour Word Recall, Delayed',
		domain: 'memory',
		unit: 'words',
		direction: 'higher_better',
		raw: [0, 10, 0],
		reported: ['scaled', 'percentile'],
		reliability: 0.76,
		notes: 'Free recall of the 10 errand words after a 25-minute delay.',
		norms: [
			[8.0, 1.6],
			[7.6, 1.7],
			[7.0, 1.8],
			[6.4, 1.9],
			[5.7, 2.1],
			[4.7, 2.3]
		]
	},
	{
		code: 'figure-recall',
		name: 'Lantern Figure Recall',
		domain: 'memory',
		unit: 'points',
		direction: 'higher_better',
		raw: [0, 36, 1],
		reported: ['t', 'percentile', 'z'],
		reliability: 0.8,
		notes: 'Half points allowed per element.',
		norms: [
			[24.9, 5.2],
			[23.8, 5.4],
			[22.0, 5.7],
			[20.1, 5.9],
			[17.6, 6.2],
			[14.8, 6.5]
		]
	},
	{
		code: 'word-harvest',
		name: 'Word Harvest',
		domain: 'language',
		unit: 'words',
		direction: 'higher_better',
		raw: [0, 80, 0],
		reported: ['z', 't', 'percentile'],
		reliability: 0.74,
		notes: 'Words of one category in 60 seconds. Norms split by years of education (0–12, 13+).',
		norms: [],
		eduNorms: {
			low: [
				[19.8, 4.6],
				[19.5, 4.6],
				[19.0, 4.7],
				[18.2, 4.8],
				[17.1, 4.9],
				[15.4, 5.0]
			],
			high: [
				[23.4, 5.0],
				[23.1, 5.0],
				[22.6, 5.1],
				[21.7, 5.2],
				[20.4, 5.3],
				[18.6, 5.4]
			]
		}
	},
	{
		code: 'object-label',
		name: 'Object Label Match',
		domain: 'language',
		unit: 'items',
		direction: 'higher_better',
		raw: [0, 40, 0],
		reported: ['scaled', 'percentile'],
		bounds: { scaled: [1, 19] },
		norms: [
			[35.2, 2.9],
			[35.6, 2.8],
			[35.7, 2.9],
			[35.3, 3.1],
			[34.4, 3.4],
			[32.7, 3.9]
		]
	},
	{
		code: 'tile-pattern',
		name: 'Mosaic Assembly',
		domain: 'visuospatial',
		unit: 'points',
		direction: 'higher_better',
		raw: [0, 48, 0],
		reported: ['scaled', 'standard'],
		reliability: 0.87,
		norms: [
			[34.1, 7.2],
			[33.0, 7.3],
			[31.2, 7.5],
			[28.9, 7.6],
			[25.8, 7.8],
			[22.0, 8.1]
		]
	},
	{
		code: 'compass-angle',
		name: 'Compass Angle Match',
		domain: 'visuospatial',
		unit: 'items',
		direction: 'higher_better',
		raw: [0, 30, 0],
		reported: ['t', 'percentile'],
		bounds: { t: [25, 75], percentile: [1, 99] },
		reliability: 0.72,
		norms: [
			[24.6, 3.3],
			[24.5, 3.3],
			[24.1, 3.4],
			[23.5, 3.6],
			[22.6, 3.8],
			[21.2, 4.1]
		]
	},
	{
		code: 'switch-rule',
		name: 'Switching Rule Errors',
		domain: 'executive',
		unit: 'errors',
		direction: 'lower_better',
		raw: [0, 64, 0],
		reported: ['standard', 't', 'percentile'],
		bounds: { standard: [55, 145] },
		reliability: 0.7,
		notes: 'Error count: perseverative responses after each rule change.',
		norms: [
			[6.2, 4.1],
			[6.8, 4.4],
			[7.9, 4.9],
			[9.4, 5.6],
			[11.6, 6.5],
			[14.5, 7.7]
		]
	},
	{
		code: 'route-plan',
		name: 'Harbour Route Planning',
		domain: 'executive',
		unit: 'points',
		direction: 'higher_better',
		raw: [0, 20, 0],
		reported: ['scaled', 'z'],
		norms: [
			[15.3, 2.6],
			[15.0, 2.7],
			[14.4, 2.8],
			[13.6, 2.9],
			[12.5, 3.1],
			[11.0, 3.3]
		]
	}
];

export const DEMO_NORM_SET = {
	code: 'harbourview-adult',
	name: 'Harbourview Adult Norms 2024',
	version: '2024.1',
	source:
		'INVENTED FOR THE CROSSTALLY DEMO — not a published normative sample. "Harbourview Adult Norms 2024", Harbourview Assessment Group (fictional), community sample of 765 adults aged 18–89.',
	ageRule: { borrowDays: 30, rounding: 'truncate' }
};

export const DEMO_BATTERIES = [
	{
		code: 'core-adult',
		name: 'Harbourview Core Adult Battery',
		description: 'Invented demo battery: the full adult set, administered in domain order.',
		tests: DEMO_TESTS.map((t) => t.code)
	},
	{
		code: 'brief-screen',
		name: 'Harbourview Brief Screen',
		description: 'Invented demo battery: a 20-minute screen of speed, memory, language and executive function.',
		tests: ['speeded-match', 'word-recall', 'word-recall-delayed', 'word-harvest', 'switch-rule']
	}
];

const CANONICAL: Field[] = ['z', 'standard', 'scaled', 't', 'percentile'];

export async function seedCatalog(): Promise<void> {
	await transaction(async (t) => {
		for (const [i, d] of DEMO_DOMAINS.entries()) {
			await exec('INSERT INTO domains (code, name, position) VALUES (:code, :name, :pos)', { ...d, pos: (i + 1) * 10 }, t);
		}
		for (const test of DEMO_TESTS) {
			await exec(
				`INSERT INTO tests (code, version, is_current, name, domain, unit, direction, raw_min, raw_max, raw_decimals, reported, bounds, reliability, notes)
				 VALUES (:code, 1, 1, :name, :domain, :unit, :direction, :min, :max, :dec, :reported, :bounds, :reliability, :notes)`,
				{
					code: test.code,
					name: test.name,
					domain: test.domain,
					unit: test.unit,
					direction: test.direction,
					min: test.raw[0],
					max: test.raw[1],
					dec: test.raw[2],
					reported: CANONICAL.filter((f) => test.reported.includes(f)).join(','),
					bounds: test.bounds ? JSON.stringify(test.bounds) : null,
					reliability: test.reliability ?? null,
					notes: test.notes ?? null
				},
				t
			);
		}
		const ns = await exec(
			'INSERT INTO norm_sets (code, name, source, version, age_rule) VALUES (:code, :name, :source, :version, :rule)',
			{ ...DEMO_NORM_SET, rule: JSON.stringify(DEMO_NORM_SET.ageRule) },
			t
		);
		const insertGroup = (p: Record<string, unknown>) =>
			exec(
				`INSERT INTO norm_groups (norm_set_id, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n)
				 VALUES (:ns, :test, :group, :min, :max, NULL, :eduMin, :eduMax, :mean, :sd, :n)`,
				{ ns: ns.insertId, eduMin: null, eduMax: null, ...p },
				t
			);
		for (const [ti, test] of DEMO_TESTS.entries()) {
			for (const [bi, band] of DEMO_BANDS.entries()) {
				// n varies a little per test (not every participant completed every test).
				const n = band.n - ((ti * 3 + bi) % 7);
				if (test.eduNorms) {
					const [lm, ls] = test.eduNorms.low[bi];
					const [hm, hs] = test.eduNorms.high[bi];
					await insertGroup({
						test: test.code,
						group: `${band.code}-e0`,
						min: band.min,
						max: band.max,
						eduMin: 0,
						eduMax: 12,
						mean: lm,
						sd: ls,
						n: Math.round(n * 0.45)
					});
					await insertGroup({
						test: test.code,
						group: `${band.code}-e13`,
						min: band.min,
						max: band.max,
						eduMin: 13,
						eduMax: 30,
						mean: hm,
						sd: hs,
						n: n - Math.round(n * 0.45)
					});
				} else {
					const [mean, sd] = test.norms[bi];
					await insertGroup({ test: test.code, group: band.code, min: band.min, max: band.max, mean, sd, n });
				}
			}
		}
		for (const b of DEMO_BATTERIES) {
			const r = await exec(
				'INSERT INTO batteries (code, name, description, norm_set_id) VALUES (:code, :name, :description, :ns)',
				{ code: b.code, name: b.name, description: b.description, ns: ns.insertId },
				t
			);
			// Ordered by domain as administered: battery order follows the domain positions.
			const order = DEMO_DOMAINS.map((d) => d.code);
			const sorted = [...b.tests].sort((x, y) => {
				const dx = order.indexOf(DEMO_TESTS.find((t) => t.code === x)!.domain);
				const dy = order.indexOf(DEMO_TESTS.find((t) => t.code === y)!.domain);
				return dx - dy || b.tests.indexOf(x) - b.tests.indexOf(y);
			});
			for (const [i, code] of sorted.entries()) {
				await exec('INSERT INTO battery_tests (battery_id, test_code, position) VALUES (:b, :code, :pos)', { b: r.insertId, code, pos: i + 1 }, t);
			}
		}
	});
}

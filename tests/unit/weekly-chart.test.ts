/**
 * The Audit's weekly chart (src/lib/components/audit/WeeklyChart.svelte), rendered on the server at
 * its default width (760 px, so the series names are end labels in the right margin). Walk-through
 * finding: when several lines end at 0, their labels were pushed down one under the other past the
 * x axis, and the last week's tick label, centred on the plot's right edge, ran into them.
 *
 * Geometry by hand: height 300, margins top 16, bottom 46, right 140 → the plot's floor (y = 0) is at
 * 300 − 46 = 254 px and its right edge at 760 − 140 = 620 px.
 */
import { describe, it, expect } from 'vitest';
import { render } from 'svelte/server';
import WeeklyChart from '../../src/lib/components/audit/WeeklyChart.svelte';

const week = (scorer: string, id: number | null, week_start: string, rate: number) => ({
	scorer,
	scorer_id: id,
	week_start,
	week: week_start,
	rate,
	errors: 0,
	fields: 100
});
// ten Mondays, as on the demo: d3's week ticks fall on Sundays, so the last one (22 Nov) lands a day
// (about 8 px) left of the plot's right edge
const WEEKS = ['2026-09-21', '2026-09-28', '2026-10-05', '2026-10-12', '2026-10-19', '2026-10-26', '2026-11-02', '2026-11-09', '2026-11-16', '2026-11-23'];
const rows = [
	...WEEKS.map((w, i) => week('Kit Moreau', 1, w, [8, 18, 16, 14, 20, 30, 8, 7, 1, 0][i])),
	...WEEKS.map((w, i) => week('Rae Lindqvist', 2, w, [2, 2, 1, 1, 0, 1, 2, 1, 0, 0][i])),
	...WEEKS.map((w, i) => week('Sam Okafor', 3, w, [2, 1, 0, 0, 1, 1, 2, 2, 1, 0][i])),
	...WEEKS.map((w, i) => week('All scorers', null, w, [5, 10, 7, 7, 15, 2, 5, 5, 1, 0][i]))
];

function texts(html: string) {
	return [...html.matchAll(/<text([^>]*)>([^<]*)<\/text>/g)].map((m) => ({
		attrs: m[1],
		text: m[2].trim(),
		x: Number(/ x="([\d.-]+)"/.exec(m[1])?.[1]),
		y: Number(/ y="([\d.-]+)"/.exec(m[1])?.[1]),
		anchor: / text-anchor="(\w+)"/.exec(m[1])?.[1] ?? 'start'
	}));
}

describe('the weekly chart’s end labels', () => {
	it('stay within the plot’s height when all lines end at 0 (none below the x axis), 13 px apart', () => {
		const t = texts(render(WeeklyChart, { props: { rows } }).body);
		const names = t.filter((x) => ['Kit Moreau', 'Rae Lindqvist', 'Sam Okafor', 'All scorers'].includes(x.text));
		expect(names).toHaveLength(4);
		// each label's baseline is its y + 4; the floor of the plot is at 254
		for (const n of names) expect(n.y - 4, n.text).toBeLessThanOrEqual(254);
		const ys = names.map((n) => n.y).sort((a, b) => a - b);
		for (let k = 1; k < ys.length; k++) expect(ys[k] - ys[k - 1]).toBeGreaterThanOrEqual(13 - 1e-9);
	});

	it('no week’s tick label runs past the plot’s right edge into the labels’ margin', () => {
		const t = texts(render(WeeklyChart, { props: { rows } }).body);
		const ticks = t.filter((x) => /^\d{1,2} \w{3,4}$/.test(x.text));
		expect(ticks.map((x) => x.text)).toContain('22 Nov');
		// a 12 px label is at most 0.6 em a character wide (the component's own rule of thumb)
		const right = (x: (typeof ticks)[number]) =>
			x.anchor === 'end' ? x.x : x.anchor === 'middle' ? x.x + (x.text.length * 7.2) / 2 : x.x + x.text.length * 7.2;
		for (const x of ticks) expect(right(x), x.text).toBeLessThanOrEqual(620);
		// the others stay centred under their ticks
		expect(ticks.filter((x) => x.text !== '22 Nov').every((x) => x.anchor === 'middle')).toBe(true);
	});
});

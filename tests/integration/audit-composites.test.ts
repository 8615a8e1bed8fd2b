/**
 * Composites on the Audit screen (walk-through finding): a composite's fields are counted — its sum
 * of parts too — and shown under its name, in a "Composites" domain of their own, never as its code
 * under a domain "unknown".
 *
 * Hand count of the Tidewater entry (tests/helpers/tidewater.ts, TIDEWATER_RIGHT), per pass:
 *   word-recall 6 (raw, z, standard, scaled, t, percentile), tile-build 3, knot-copy 3, cargo-code 2,
 *   category-naming 5, beacon-slips 2, memory-index 3 (sum, standard, percentile),
 *   visuomotor-index 3 → 27 fields, of which 6 raw scores and 21 derived (the two sums among them);
 *   the composites' fields: 3 + 3 = 6.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { closeDb, select, selectOne } from '../../src/lib/server/db';
import { auditScreen } from '../../src/lib/server/audit-stats/screen';
import { NO_FILTERS } from '../../src/lib/server/audit-stats/filters';
import { signedIn, ACCOUNTS } from '../helpers/http';
import { tidewaterProtocol, tidewaterCarriedSlip } from '../helpers/tidewater';
import { uniqueCode } from '../helpers/workflow';

let id = 0;
let battery = 0;

beforeAll(async () => {
	const c = { lead: await signedIn('lead'), first: await signedIn('scorer'), second: await signedIn('scorer2'), reviewer: await signedIn('reviewer') };
	const who = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
	// the first pass carries a misread tile-build scaled score into the Memory Index: errors on a composite
	id = await tidewaterProtocol(c, { ...who, code: uniqueCode('AC') }, { first: tidewaterCarriedSlip(), verify: true });
	battery = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'tidewater-profile'"))!.id;
}, 120_000);

afterAll(closeDb);

describe('a composite in the audit', () => {
	it('counts its sum of parts: the per-test rows of a pass add up to the pass’s own count (27 = 6 raw + 21 derived)', async () => {
		const rows = await select<{ which: string; test_code: string; domain: string; fields_entered: number; raw_fields: number; derived_fields: number }>(
			'SELECT which, test_code, domain, fields_entered, raw_fields, derived_fields FROM audit_fields WHERE protocol_id = :id ORDER BY which, test_code',
			{ id }
		);
		for (const which of ['first', 'second']) {
			const mine = rows.filter((r) => r.which === which);
			const whole = mine.find((r) => r.test_code === '')!;
			const tests = mine.filter((r) => r.test_code !== '');
			expect(Number(whole.fields_entered), which).toBe(27);
			expect(
				tests.reduce((n, r) => n + Number(r.fields_entered), 0),
				which
			).toBe(27);
			expect(
				tests.reduce((n, r) => n + Number(r.raw_fields), 0),
				which
			).toBe(6);
			expect(
				tests.reduce((n, r) => n + Number(r.derived_fields), 0),
				which
			).toBe(21);
			const memory = tests.find((r) => r.test_code === 'memory-index')!;
			expect([memory.domain, Number(memory.fields_entered), Number(memory.raw_fields), Number(memory.derived_fields)]).toEqual(['_composites', 3, 0, 3]);
		}
		expect(rows.filter((r) => r.domain === 'unknown')).toEqual([]);
	});

	it('charges a composite’s errors to the Composites domain', async () => {
		const events = await select<{ test_code: string; domain: string }>('SELECT test_code, domain FROM error_events WHERE protocol_id = :id', { id });
		const onComposites = events.filter((e) => e.test_code.endsWith('-index'));
		// the carried slip: the Memory Index of the first pass (28 → 123, 94) was not kept
		expect(onComposites.length).toBeGreaterThan(0);
		expect(new Set(onComposites.map((e) => e.domain))).toEqual(new Set(['_composites']));
	});

	it('the Audit screen names composites and their domain, and its field counts agree with the overall count', async () => {
		const screen = await auditScreen({ ...NO_FILTERS, battery });
		const r = screen.reports!;
		const all = <T extends { scorer_id: number | null }>(rows: T[]) => rows.filter((x) => x.scorer_id === null);
		const overall = r.scorers.find((x) => x.scorer_id === null)!;
		// by test: the composites by name, never by code
		const tests = all(r.tests);
		expect(tests.map((t) => t.group_name)).toEqual(expect.arrayContaining(['Memory Index', 'Visuomotor Index']));
		expect(tests.map((t) => t.group_name)).not.toContain('memory-index');
		// by domain: "Composites", never "unknown"
		const domains = all(r.domains);
		expect(domains.map((d) => d.group_name)).toContain('Composites');
		expect(domains.map((d) => d.group_name)).not.toContain('unknown');
		// each table counts every field once: its rows add up to the overall count (sums included)
		const sum = (rows: { fields: number; errors: number }[]) =>
			rows.reduce((n, x) => ({ fields: n.fields + x.fields, errors: n.errors + x.errors }), { fields: 0, errors: 0 });
		expect(sum(tests)).toEqual({ fields: overall.fields, errors: overall.errors });
		expect(sum(domains)).toEqual({ fields: overall.fields, errors: overall.errors });
		expect(sum(all(r.fields))).toEqual({ fields: overall.fields, errors: overall.errors });
		// this protocol's share of the Composites row: 6 composite fields per pass, both passes
		const composites = domains.find((d) => d.group_name === 'Composites')!;
		expect(composites.fields).toBeGreaterThanOrEqual(12);
		expect(composites.fields % 6).toBe(0);
	});
});

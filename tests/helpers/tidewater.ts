/**
 * Protocols of the demo's Tidewater Cognitive Profile for tests (conversion tables per age band, two
 * composites, a regression-normed test, a percentile-band error count; all invented, db/seeds/profile.ts).
 *
 * The examinee: born 1990-03-10, tested 2025-11-20 → 35;8;10, age band a30 (360–479 months);
 * education 14 years; regression norms take whole years (35). The right look-ups, worked by hand
 * (reconcile.md's worked examples for tile-build, category-naming and memory-index; normal table
 * Φ(0.40) = .6554):
 * - word-recall raw 29, a30 mean 24.5 SD 4.2: z 4.5/4.2 = 1.07, standard 116, scaled 13, T 61, percentile 86.
 * - tile-build raw 16: a30 row 16 → scaled 14; percentile R(100·Φ(4/3)) = 91.
 * - knot-copy raw 25: a30 table row 25 → 12 (10 + 3·2.4/4.0 = 11.8); percentile R(100·Φ(2/3)) = 75.
 * - cargo-code raw 53: a30 table (10 + 3·3.4/9.6 = 11.06) → 11.
 * - category-naming raw 48: predicted 30 − 0.15·35 + 1.2·14 = 41.55; z = 6.45/8 = 0.806 → 0.81,
 *   standard 112, T 58, percentile 79.
 * - beacon-slips raw 3: the 2–3 row's band, 50-74.
 * - memory-index: 13 + 14 = 27, mean 20 SD 5.2: standard R(100 + 15·7/5.2) = 120, percentile 91.
 * - visuomotor-index: 12 + 11 = 23, sum table row 22–23 → standard 106; percentile R(100·Φ(0.40)) = 66.
 */
import { expect } from 'vitest';
import type { Client } from './http';
import { createViaForm, saveAndSubmit, type Scores } from './workflow';
import { select, selectOne } from '../../src/lib/server/db';

export const TIDEWATER_EXAMINEE = { battery: 'tidewater-profile', birthDate: '1990-03-10', testDate: '2025-11-20', educationYears: 14 };

export const TIDEWATER_RIGHT: Scores = {
	'word-recall': { raw: '29', z: '1.07', standard: '116', scaled: '13', t: '61', percentile: '86' },
	'tile-build': { raw: '16', scaled: '14', percentile: '91' },
	'knot-copy': { raw: '25', scaled: '12', percentile: '75' },
	'cargo-code': { raw: '53', scaled: '11' },
	'category-naming': { raw: '48', z: '0.81', standard: '112', t: '58', percentile: '79' },
	'beacon-slips': { raw: '3', percentile: '50-74' },
	'memory-index': { sum: '27', standard: '120', percentile: '91' },
	'visuomotor-index': { sum: '23', standard: '106', percentile: '66' }
} as Scores;

/**
 * The first pass reads tile-build off the next row (17–18 → 15) and carries it into the Memory
 * Index: 13 + 15 = 28 → standard R(100 + 15·8/5.2) = R(123.08) = 123, percentile R(100·Φ(1.538)) = 94.
 */
export function tidewaterCarriedSlip(): Scores {
	const s: Scores = JSON.parse(JSON.stringify(TIDEWATER_RIGHT));
	s['tile-build'].scaled = '15';
	Object.assign(s['memory-index'], { sum: '28', standard: '123', percentile: '94' });
	return s;
}

/** A Tidewater protocol through both passes (first with `first`, second right); `verify` keeps every recomputed value and signs off. */
export async function tidewaterProtocol(
	c: { lead: Client; first: Client; second: Client; reviewer: Client },
	who: { first: string; second: string; reviewer: string; code?: string },
	opts: { first?: Scores; verify?: boolean } = {}
): Promise<number> {
	const id = await createViaForm(c.lead, { ...who, ...TIDEWATER_EXAMINEE });
	expect((await saveAndSubmit(c.first, id, opts.first ?? TIDEWATER_RIGHT)).status).toBe(200);
	expect((await saveAndSubmit(c.second, id, TIDEWATER_RIGHT)).status).toBe(200);
	if (!opts.verify) return id;
	// parts before composites (a composite's cards wait on its parts): open rows in position order, ready ones first
	for (let guard = 0; guard < 40; guard++) {
		const open = await select<{ id: number; lock_version: number }>(
			'SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id AND resolved_at IS NULL ORDER BY position',
			{ id }
		);
		if (!open.length) break;
		let done = false;
		for (const d of open) {
			const r = await c.reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: d.lock_version } });
			if (r.status === 200) {
				done = true;
				break;
			}
			expect(r.status, await r.clone().text()).toBe(409);
		}
		expect(done).toBe(true);
	}
	const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
	const ok = await c.reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } });
	expect(ok.status, await ok.clone().text()).toBe(200);
	return id;
}

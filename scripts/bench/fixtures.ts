/**
 * Fixtures for bench:http and bench:pages, made through the real services (the same code the
 * routes call): protocols waiting for their second submit, protocols in review with open
 * discrepancies, and a 60-field battery (12 tests × raw + 4 derived scores). Import after the env
 * file is loaded (config.ts reads the environment on first import).
 */
import { select, selectOne, exec } from '../../src/lib/server/db';
import { createProtocol, type Actor } from '../../src/lib/server/protocols/service';
import { saveDraft, submitPass, type Scores } from '../../src/lib/server/protocols/passes';
import { protocolTests, normGroups } from '../../src/lib/server/catalog';
import { createTest, getTest, createBattery, getBatteryByCode } from '../../src/lib/server/catalog';
import { referenceScore, zFromRaw, formatReference } from '../../src/lib/scoring/scales';
import type { Role } from '../../src/lib/roles';

export const EMAILS = {
	first: 'sam.scorer@demo.crosstally.test',
	second: 'rae.scorer@demo.crosstally.test',
	second2: 'kit.scorer@demo.crosstally.test',
	reviewer: 'rita.reviewer@demo.crosstally.test',
	lead: 'lee.lead@demo.crosstally.test'
} as const;
export const PASSWORD = 'crosstally-demo';

export async function actor(email: string): Promise<Actor> {
	const u = await selectOne<{ id: number; name: string; roles: string }>('SELECT id, name, roles FROM users WHERE email = :email', { email });
	if (!u) throw new Error(`no user ${email}: seed the accounts first`);
	return { id: u.id, name: u.name, roles: String(u.roles).split(',') as Role[] };
}

/** The correct entry of every field (raw at the norm mean, derived scores looked up as the engine does). */
export async function correctScores(protocolId: number): Promise<Scores> {
	const p = await selectOne<{ norm_set_id: number }>('SELECT norm_set_id FROM protocols WHERE id = :id', { id: protocolId });
	const tests = await protocolTests(protocolId);
	const groups = await normGroups(
		p!.norm_set_id,
		tests.map((t) => t.code)
	);
	const out: Scores = {};
	for (const [i, t] of tests.entries()) {
		const g = groups.find((x) => x.test_code === t.code && x.group_code === t.groupCode)!;
		const step = 10 ** -t.raw.decimals;
		const raw = Math.min(t.raw.max, Math.max(t.raw.min, Math.round(Number(g.mean) / step) * step + (i % 3) * step));
		const z = zFromRaw(raw, Number(g.mean), Number(g.sd), t.direction);
		out[t.code] = { raw: raw.toFixed(t.raw.decimals) };
		for (const f of t.reported) out[t.code][f] = formatReference(f, referenceScore(f, z, t.bounds));
	}
	return out;
}

/** The same entry with `slips` derived fields mistyped (each a different field, the recomputed value kept valid). */
function withSlips(s: Scores, slips: number): Scores {
	const out: Scores = JSON.parse(JSON.stringify(s));
	let n = 0;
	for (const fields of Object.values(out)) {
		for (const f of Object.keys(fields)) {
			if (n >= slips) return out;
			if (f === 'raw' || fields[f] == null) continue;
			const v = Number(fields[f]);
			fields[f] = f === 'z' ? (v + 0.3).toFixed(2) : String(v + (f === 'percentile' ? (v > 50 ? -3 : 3) : 1));
			n++;
			break; // one slip per test
		}
	}
	return out;
}

let seq = 0;
const code = (prefix: string) => `${prefix}-${Date.now().toString(36)}-${++seq}`.toUpperCase();

export interface Made {
	id: number;
	secondDraftVersion: number;
}

/**
 * Protocols through the services: created by the lead, first pass saved and submitted, second pass
 * saved; with `reconcile` the second pass is submitted too (in review, `slips` open discrepancies each).
 */
export async function makeProtocols(opts: {
	n: number;
	batteryCode?: string;
	second: string;
	reconcile: boolean;
	slips?: number;
	concurrency?: number;
	prefix?: string;
}): Promise<Made[]> {
	const lead = await actor(EMAILS.lead);
	const first = await actor(EMAILS.first);
	const second = await actor(opts.second);
	const reviewer = await actor(EMAILS.reviewer);
	const battery = await selectOne<{ id: number }>('SELECT id FROM batteries WHERE code = :c', { c: opts.batteryCode ?? 'brief-screen' });
	if (!battery) throw new Error(`no battery ${opts.batteryCode}`);
	const made: Made[] = [];
	let next = 0;
	let template: Scores | null = null;
	const one = async () => {
		const id = await createProtocol(
			{
				examinee: { code: code(opts.prefix ?? 'BENCH'), birthDate: '1988-05-17', sex: 'F', educationYears: 14 },
				batteryId: battery.id,
				testDate: '2026-11-20',
				firstScorerId: first.id,
				secondScorerId: second.id,
				reviewerId: reviewer.id
			},
			lead
		);
		// same battery, examinee age and norm set: one look-up serves every protocol
		template ??= await correctScores(id);
		const a = await saveDraft(id, first, { scores: template, draftVersion: 0 });
		await submitPass(id, first, { draftVersion: a.draftVersion });
		const b = await saveDraft(id, second, { scores: opts.reconcile ? withSlips(template, opts.slips ?? 4) : template, draftVersion: 0 });
		if (opts.reconcile) await submitPass(id, second, { draftVersion: b.draftVersion });
		made.push({ id, secondDraftVersion: b.draftVersion });
	};
	const worker = async () => {
		while (next < opts.n) {
			next++;
			await one();
		}
	};
	await Promise.all(Array.from({ length: opts.concurrency ?? 4 }, worker));
	return made;
}

export interface OpenDiscrepancy {
	id: number;
	body: { choice: 'recomputed' | 'first'; lockVersion: number; note: string };
}

/** Open discrepancies of the given protocols, each with a valid resolution body. */
export async function openDiscrepancies(protocolIds: number[]): Promise<OpenDiscrepancy[]> {
	if (!protocolIds.length) return [];
	const rows = await select<{ id: number; expected: string | null; lock_version: number }>(
		'SELECT id, expected, lock_version FROM discrepancies WHERE protocol_id IN (:ids) AND resolved_at IS NULL ORDER BY id',
		{ ids: protocolIds }
	);
	return rows.map((d) => ({ id: d.id, body: { choice: d.expected !== null ? 'recomputed' : 'first', lockVersion: d.lock_version, note: 'bench' } }));
}

const BENCH60 = 'bench-60-fields';

/** A battery of 12 tests × (raw + z, standard, scaled, t) = 60 fields, with norms copied from speeded-match. */
export async function ensure60FieldBattery(): Promise<string> {
	if (await getBatteryByCode(BENCH60)) return BENCH60;
	const lead = await actor(EMAILS.lead);
	const template = await getTest('speeded-match');
	if (!template) throw new Error('the demo catalog (speeded-match) is missing');
	const domains = (await select<{ code: string }>('SELECT code FROM domains ORDER BY position')).map((d) => d.code);
	const codes: string[] = [];
	for (let i = 1; i <= 12; i++) {
		const c = `bench-t${String(i).padStart(2, '0')}`;
		codes.push(c);
		if (await getTest(c)) continue;
		await createTest(
			{
				code: c,
				name: `Bench test ${i}`,
				domain: domains[Math.floor((i - 1) / 2) % domains.length],
				unit: template.unit,
				direction: template.direction,
				raw: template.raw,
				reported: ['z', 'standard', 'scaled', 't'],
				bounds: null,
				reliability: template.reliability ?? null,
				notes: null
			},
			lead.id
		);
		await exec(
			`INSERT INTO norm_groups (norm_set_id, test_code, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n)
			 SELECT norm_set_id, :c, group_code, age_min_months, age_max_months, sex, edu_min, edu_max, mean, sd, n FROM norm_groups WHERE test_code = 'speeded-match'`,
			{ c }
		);
	}
	const ns = await selectOne<{ norm_set_id: number }>(`SELECT norm_set_id FROM batteries WHERE code = 'core-adult'`);
	await createBattery(
		{ code: BENCH60, name: 'Bench battery, 60 fields', description: 'Invented for bench:pages', norm_set_id: ns?.norm_set_id ?? null, tests: codes },
		lead.id
	);
	return BENCH60;
}

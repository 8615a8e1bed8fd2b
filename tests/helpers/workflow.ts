/** Building protocols for tests through the app's own routes, and the correct look-ups for them. */
import { expect } from 'vitest';
import type { Client } from './http';
import { selectOne } from '../../src/lib/server/db';
import { protocolTests, normGroups } from '../../src/lib/server/catalog';
import { referenceScore, zFromRaw, formatReference, type Field } from '../../src/lib/scoring/scales';

export type Scores = Record<string, Partial<Record<Field, string | null>>>;

export async function userId(email: string): Promise<number> {
	const u = await selectOne<{ id: number }>('SELECT id FROM users WHERE email = :email', { email });
	if (!u) throw new Error(`no user ${email}`);
	return u.id;
}

let counter = 0;
export function uniqueCode(prefix = 'T') {
	return `${prefix}-${Date.now().toString(36)}-${++counter}`.toUpperCase();
}

/** Create a protocol as a lead through the New protocol form; returns its id. */
export async function createViaForm(
	lead: Client,
	opts: { first: string; second: string; reviewer: string; battery?: string; code?: string; birthDate?: string; testDate?: string; educationYears?: number }
): Promise<number> {
	const battery = await selectOne<{ id: number }>('SELECT id FROM batteries WHERE code = :c', { c: opts.battery ?? 'brief-screen' });
	const r = await lead.action('/protocols/new', {
		code: opts.code ?? uniqueCode(),
		birthDate: opts.birthDate ?? '1988-05-17',
		sex: 'F',
		educationYears: String(opts.educationYears ?? 14),
		batteryId: String(battery!.id),
		testDate: opts.testDate ?? '2026-11-20',
		firstScorerId: String(await userId(opts.first)),
		secondScorerId: String(await userId(opts.second)),
		reviewerId: String(await userId(opts.reviewer))
	});
	expect(r.body.type, JSON.stringify(r.body)).toBe('redirect');
	return Number(r.body.location!.match(/\/protocols\/(\d+)/)![1]);
}

/** The correct entry for given raw scores: every reported field looked up as the engine would. */
export async function correctScores(protocolId: number, raws: Record<string, number>): Promise<Scores> {
	const p = await selectOne<{ norm_set_id: number }>('SELECT norm_set_id FROM protocols WHERE id = :id', { id: protocolId });
	const tests = await protocolTests(protocolId);
	const groups = await normGroups(
		p!.norm_set_id,
		tests.map((t) => t.code)
	);
	const out: Scores = {};
	for (const t of tests) {
		const g = groups.find((x) => x.test_code === t.code && x.group_code === t.groupCode)!;
		const raw = raws[t.code] ?? Math.round((Number(g.mean) + Number.EPSILON) * 10 ** t.raw.decimals) / 10 ** t.raw.decimals;
		const z = zFromRaw(raw, Number(g.mean), Number(g.sd), t.direction);
		out[t.code] = { raw: raw.toFixed(t.raw.decimals) };
		for (const f of t.reported) out[t.code][f] = formatReference(f, referenceScore(f, z, t.bounds));
	}
	return out;
}

export async function getPass(c: Client, id: number) {
	const r = await c.get(`/api/v1/protocols/${id}/pass`);
	return { status: r.status, body: await r.json() };
}

export async function saveAndSubmit(c: Client, id: number, scores: Scores) {
	const pass = await getPass(c, id);
	expect(pass.status).toBe(200);
	const put = await c.request(`/api/v1/protocols/${id}/pass`, { method: 'PUT', json: { scores, draftVersion: pass.body.draftVersion } });
	const saved = await put.json();
	expect(put.status, JSON.stringify(saved)).toBe(200);
	const post = await c.request(`/api/v1/protocols/${id}/pass`, { method: 'POST', json: { draftVersion: saved.draftVersion } });
	return { status: post.status, body: await post.json() };
}

/**
 * A protocol carried through the workflow by the app's own routes: both scorers submit (the second
 * with `second` overriding some values), and, when `verify` is set, the reviewer keeps the
 * recomputed value of every discrepancy and signs off. Returns the protocol id.
 */
export async function throughWorkflow(
	c: { lead: Client; first: Client; second: Client; reviewer: Client },
	opts: {
		first: string;
		second: string;
		reviewer: string;
		battery?: string;
		code?: string;
		birthDate?: string;
		testDate?: string;
		raws?: Record<string, number>;
		secondChanges?: Scores;
		verify?: boolean;
	}
): Promise<number> {
	const id = await createViaForm(c.lead, opts);
	const correct = await correctScores(id, opts.raws ?? {});
	expect((await saveAndSubmit(c.first, id, correct)).status).toBe(200);
	const second: Scores = JSON.parse(JSON.stringify(correct));
	for (const [code, fields] of Object.entries(opts.secondChanges ?? {})) Object.assign(second[code], fields);
	expect((await saveAndSubmit(c.second, id, second)).status).toBe(200);
	if (!opts.verify) return id;
	const { select } = await import('../../src/lib/server/db');
	// one at a time: settling a raw score may close its test's derived discrepancies
	for (let guard = 0; guard < 100; guard++) {
		const [d] = await select<{ id: number; lock_version: number }>(
			'SELECT id, lock_version FROM discrepancies WHERE protocol_id = :id AND resolved_at IS NULL ORDER BY id LIMIT 1',
			{ id }
		);
		if (!d) break;
		const r = await c.reviewer.request(`/api/v1/discrepancies/${d.id}`, { method: 'PATCH', json: { choice: 'recomputed', lockVersion: d.lock_version } });
		expect(r.status, await r.clone().text()).toBe(200);
	}
	const p = await selectOne<{ lock_version: number }>('SELECT lock_version FROM protocols WHERE id = :id', { id });
	const ok = await c.reviewer.request(`/api/v1/protocols/${id}/signoff`, { method: 'POST', json: { lockVersion: p!.lock_version } });
	expect(ok.status, await ok.clone().text()).toBe(200);
	return id;
}

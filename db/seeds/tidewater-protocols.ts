/**
 * Demo protocols of the invented Tidewater Cognitive Profile (db/seeds/profile.ts): conversion tables
 * per age band, two composites, a regression-normed test and a percentile-band error count. A few
 * examinees in different states, so a new user sees composites and bands on Review and Summary:
 *   TW-0201  verified: the second pass wrote Tile Build's scaled score one too high (the value
 *            another age band's table gives, so it is named a wrong norm group) and carried it
 *            into the Memory Index; the reviewer kept the recomputed values.
 *   TW-0202  in review: Knot Copy read off the next row and carried into the Visuomotor Index by
 *            one pass, the other added the Memory Index's parts up wrong.
 *   TW-0203  verified, both passes clean: a low profile with a wide false-alarm band.
 *   TW-0204  waiting for the second pass.
 * Every person, score and slip is invented. Values are looked up through the engine the app uses
 * (testReferences, compositeReferences), so the passes hold what a careful scorer would write
 * before the invented slips are applied.
 */
import { db, selectOne, jsonValue } from '../../src/lib/server/db';
import { createProtocol, type Actor } from '../../src/lib/server/protocols/service';
import { myPass, saveDraft, submitPass, type Scores } from '../../src/lib/server/protocols/passes';
import { reviewView, resolveDiscrepancy, signOff } from '../../src/lib/server/protocols/decisions';
import { addAttachment } from '../../src/lib/server/protocols/attachments';
import { protocolTests, protocolComposites, normGroups, normDef, engineTest, engineComposite } from '../../src/lib/server/catalog';
import { testReferences, compositeReferences, compositeSpan } from '../../src/lib/scoring/reconcile';
import type { NormEntry, CompositeNormEntry } from '../../src/lib/scoring/norms';
import { formatReference, type DerivedField } from '../../src/lib/scoring/scales';
import { clinicToday } from '../../src/lib/server/clock';
import { recordFormPdf } from './record-form';

type Slip = (s: Scores) => void;
interface TwPlan {
	code: string;
	birth: string;
	sex: 'F' | 'M';
	edu: number;
	first: string;
	second: string;
	reviewer: string;
	daysAgo: number;
	state: 'awaiting_second' | 'in_review' | 'verified';
	raws: Record<string, number>;
	firstSlips?: Slip[];
	secondSlips?: Slip[];
}

/** Add `k` to a composite's part in one pass and carry it: the sum and the look-ups follow the wrong part. */
const bump =
	(test: string, field: 'scaled', k: number): Slip =>
	(s) => {
		s[test][field] = String(Number(s[test][field]) + k);
	};

const PLANS: TwPlan[] = [
	{
		code: 'TW-0201',
		birth: '1984-06-02',
		sex: 'F',
		edu: 16,
		first: 'sam',
		second: 'kit',
		reviewer: 'rita',
		daysAgo: 20,
		state: 'verified',
		raws: { 'word-recall': 27, 'tile-build': 13, 'knot-copy': 24, 'cargo-code': 55, 'category-naming': 51, 'beacon-slips': 1 },
		// Kit writes Tile Build's scaled score one too high and carries it into the Memory Index
		secondSlips: [bump('tile-build', 'scaled', 1)]
	},
	{
		code: 'TW-0202',
		birth: '1961-09-17',
		sex: 'M',
		edu: 12,
		first: 'rae',
		second: 'sam',
		reviewer: 'rita',
		daysAgo: 4,
		state: 'in_review',
		raws: { 'word-recall': 19, 'tile-build': 11, 'knot-copy': 19, 'cargo-code': 38, 'category-naming': 33, 'beacon-slips': 5 },
		// Rae adds the Memory Index's parts up one short (the look-ups are right for the true sum)
		firstSlips: [(s) => (s['memory-index'].sum = String(Number(s['memory-index'].sum) - 1))],
		// Sam reads Knot Copy off the next row and carries it into the Visuomotor Index
		secondSlips: [bump('knot-copy', 'scaled', 1)]
	},
	{
		code: 'TW-0203',
		birth: '1949-01-25',
		sex: 'F',
		edu: 10,
		first: 'kit',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 12,
		state: 'verified',
		raws: { 'word-recall': 15, 'tile-build': 8, 'knot-copy': 13, 'cargo-code': 26, 'category-naming': 27, 'beacon-slips': 10 }
	},
	{
		code: 'TW-0204',
		birth: '1997-12-08',
		sex: 'M',
		edu: 15,
		first: 'sam',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 1,
		state: 'awaiting_second',
		raws: { 'word-recall': 30, 'tile-build': 17, 'knot-copy': 27, 'cargo-code': 60, 'category-naming': 55, 'beacon-slips': 0 }
	}
];

async function at(daysAgo: number, hour = 10) {
	const ts = Math.floor(Date.now() / 1000) - Math.round(daysAgo * 86400) + hour * 60;
	await db().query(`SET timestamp = ${ts}`);
}

/** What a careful scorer writes for these raw scores: every reported field of the tests, then the composites from those parts. */
async function carefulEntry(protocolId: number, raws: Record<string, number>): Promise<Scores> {
	const p = await selectOne<{ norm_set_id: number; covariates: unknown }>('SELECT norm_set_id, covariates FROM protocols WHERE id = :id', { id: protocolId });
	const tests = await protocolTests(protocolId);
	const composites = await protocolComposites(protocolId);
	const groups = await normGroups(p!.norm_set_id, [...tests.map((t) => t.code), ...composites.map((c) => c.code)]);
	const covariates = jsonValue<Record<string, number> | null>(p!.covariates ?? null);
	const out: Scores = {};
	for (const t of tests) {
		const g = groups.find((x) => x.test_code === t.code && x.group_code === t.groupCode)!;
		const refs = testReferences(engineTest(t), normDef(g) as NormEntry, String(raws[t.code]), covariates)!;
		out[t.code] = { raw: String(raws[t.code]) };
		for (const f of t.reported) out[t.code][f] = refs[f] === undefined ? null : formatReference(f, refs[f]!);
	}
	for (const c of composites) {
		const g = groups.find((x) => x.test_code === c.code && x.group_code === c.groupCode)!;
		const sum = c.parts.reduce((a, part) => a + Number(out[part][c.part_field as DerivedField]), 0);
		const span = compositeSpan(
			engineComposite(c),
			tests.map((t) => engineTest(t))
		);
		const refs = compositeReferences(normDef(g) as CompositeNormEntry, sum, span)!;
		out[c.code] = {};
		for (const f of c.reported) out[c.code][f as DerivedField] = refs[f as 'sum'] === undefined ? null : formatReference(f as DerivedField, refs[f as 'sum']!);
	}
	return out;
}

/** Apply slips to a copy; a slip on a composite's part is carried into the composite (sum and look-ups from the pass's own parts). */
async function withSlips(protocolId: number, right: Scores, raws: Record<string, number>, slips: Slip[] = []): Promise<Scores> {
	const s: Scores = JSON.parse(JSON.stringify(right));
	if (!slips.length) return s;
	const before = JSON.stringify(s);
	for (const slip of slips) slip(s);
	const composites = await protocolComposites(protocolId);
	const p = await selectOne<{ norm_set_id: number }>('SELECT norm_set_id FROM protocols WHERE id = :id', { id: protocolId });
	const groups = await normGroups(
		p!.norm_set_id,
		composites.map((c) => c.code)
	);
	const tests = await protocolTests(protocolId);
	for (const c of composites) {
		const partsChanged = c.parts.some((part) => JSON.stringify(s[part]) !== JSON.stringify((JSON.parse(before) as Scores)[part]));
		if (!partsChanged) continue;
		const g = groups.find((x) => x.test_code === c.code && x.group_code === c.groupCode)!;
		const sum = c.parts.reduce((a, part) => a + Number(s[part][c.part_field as DerivedField]), 0);
		const refs = compositeReferences(
			normDef(g) as CompositeNormEntry,
			sum,
			compositeSpan(
				engineComposite(c),
				tests.map((t) => engineTest(t))
			)
		)!;
		for (const f of c.reported) s[c.code][f as DerivedField] = refs[f as 'sum'] === undefined ? null : formatReference(f as DerivedField, refs[f as 'sum']!);
	}
	return s;
}

export async function seedTidewaterProtocols(actors: Record<string, Actor>, lead: Actor): Promise<number> {
	const battery = await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'tidewater-profile'");
	if (!battery) throw new Error('demo battery tidewater-profile missing');
	for (const plan of PLANS) {
		await at(plan.daysAgo + 0.5, 9);
		const id = await createProtocol(
			{
				examinee: { code: plan.code, birthDate: plan.birth, sex: plan.sex, educationYears: plan.edu, name: null },
				batteryId: battery.id,
				testDate: clinicToday(new Date(Date.now() - plan.daysAgo * 86400_000)),
				firstScorerId: actors[plan.first].id,
				secondScorerId: actors[plan.second].id,
				reviewerId: actors[plan.reviewer].id
			},
			lead
		);
		await myPass(id, actors[plan.first]);
		const right = await carefulEntry(id, plan.raws);
		await at(plan.daysAgo + 0.3, 11);
		const d1 = await saveDraft(id, actors[plan.first], { scores: await withSlips(id, right, plan.raws, plan.firstSlips), draftVersion: 0 });
		await submitPass(id, actors[plan.first], { draftVersion: d1.draftVersion });
		const lines = Object.entries(plan.raws).map(([code, raw]) => `${code.padEnd(22, ' ')} raw ${raw}`);
		await addAttachment(
			id,
			lead,
			new File([recordFormPdf(`Tidewater record form ${plan.code}`, lines)], `record-form-${plan.code}.pdf`, { type: 'application/pdf' })
		);
		if (plan.state === 'awaiting_second') continue;
		await at(Math.max(0, plan.daysAgo - 0.6), 15);
		const d2 = await saveDraft(id, actors[plan.second], { scores: await withSlips(id, right, plan.raws, plan.secondSlips), draftVersion: 0 });
		await submitPass(id, actors[plan.second], { draftVersion: d2.draftVersion });
		if (plan.state === 'in_review') continue;
		await at(Math.max(0, plan.daysAgo - 1.2), 10);
		const reviewer = actors[plan.reviewer];
		// the record form agrees with the recomputation: parts first (composite cards wait on them), then the composites
		for (let guard = 0; guard < 40; guard++) {
			const view = await reviewView(id, reviewer);
			const next = view.discrepancies.find((d) => !d.resolvedAt && d.waitsOn.length === 0);
			if (!next) break;
			await resolveDiscrepancy(next.id, reviewer, { choice: 'recomputed', note: null, lockVersion: next.lockVersion });
		}
		const fresh = await reviewView(id, reviewer);
		await signOff(id, reviewer, { lockVersion: fresh.protocol.lock_version });
	}
	return PLANS.length;
}

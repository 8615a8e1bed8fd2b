/**
 * Demo protocols of the invented Harbourview clinic: a dozen and more examinees in every state,
 * entered by three demo scorers with their own, realistic error habits (all invented):
 *   Sam  careful; now and then swaps two digits.
 *   Rae  forgets to reverse timed tests; rounds z to one decimal.
 *   Kit  looks up the wrong age band, writes T-scores in the standard-score field, leaves fields
 *        empty; gets better over the ten weeks (training works).
 * Runs through the same services as the app, so every row is what the app itself would write.
 * The clock is moved back per protocol with MariaDB's session `timestamp`, so the audit has weeks.
 */
import { db, select, selectOne } from '../../src/lib/server/db';
import { createProtocol, type Actor } from '../../src/lib/server/protocols/service';
import { myPass, saveDraft, submitPass, type Scores } from '../../src/lib/server/protocols/passes';
import { reviewView, resolveDiscrepancy, signOff, reopen } from '../../src/lib/server/protocols/decisions';
import { addAttachment } from '../../src/lib/server/protocols/attachments';
import { normGroups } from '../../src/lib/server/catalog';
import { getUserByEmail } from '../../src/lib/server/users';
import { referenceScore, zFromRaw, roundTo, type DerivedField, type Field } from '../../src/lib/scoring/scales';
import { recordFormPdf } from './record-form';
import { clinicToday } from '../../src/lib/server/clock';
import { seedTidewaterProtocols } from './tidewater-protocols';

function prng(seed: number) {
	return () => {
		seed |= 0;
		seed = (seed + 0x6d2b79f5) | 0;
		let t = Math.imul(seed ^ (seed >>> 15), 1 | seed);
		t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
		return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
	};
}
const rand = prng(20261201);
const pick = <T>(xs: readonly T[]) => xs[Math.floor(rand() * xs.length)];

type Habit = 'transposition' | 'sign_flip' | 'rounding' | 'wrong_norm_group' | 'wrong_scale' | 'missing' | 'raw_typo' | 'digit_drop';
const HABITS: Record<string, { rate: (week: number) => number; habits: Habit[] }> = {
	sam: { rate: () => 0.025, habits: ['transposition', 'transposition', 'raw_typo', 'digit_drop'] },
	rae: { rate: () => 0.06, habits: ['sign_flip', 'sign_flip', 'rounding', 'transposition'] },
	kit: { rate: (w) => Math.max(0.03, 0.14 - w * 0.012), habits: ['wrong_norm_group', 'wrong_scale', 'transposition', 'missing', 'raw_typo'] }
};

const swapDigits = (s: string) => {
	const idx = [...s].map((c, i) => (i < s.length - 1 && /\d/.test(c) && /\d/.test(s[i + 1]) && c !== s[i + 1] ? i : -1)).filter((i) => i >= 0);
	if (!idx.length) return null;
	const i = pick(idx);
	return s.slice(0, i) + s[i + 1] + s[i] + s.slice(i + 2);
};
const fmt = (f: DerivedField, v: number) => (f === 'z' ? v.toFixed(2) : String(v));

interface TestInfo {
	code: string;
	direction: 'higher_better' | 'lower_better';
	raw: { min: number; max: number; decimals: number };
	reported: DerivedField[];
	bounds: Record<string, [number, number]> | null;
	groupCode: string | null;
}

/** A pass's values: the correct look-ups for the true raw scores, with the scorer's habits. */
function enter(tests: TestInfo[], truth: Record<string, number>, norms: Awaited<ReturnType<typeof normGroups>>, who: string, week: number): Scores {
	const habit = HABITS[who];
	const out: Scores = {};
	for (const t of tests) {
		const g = norms.find((n) => n.test_code === t.code && n.group_code === t.groupCode)!;
		const other = norms.find((n) => n.test_code === t.code && n.group_code !== t.groupCode && Math.abs(n.age_min_months - g.age_min_months) <= 130);
		let raw = truth[t.code];
		const rawText = raw.toFixed(t.raw.decimals);
		const row: Partial<Record<Field, string | null>> = { raw: rawText };
		if (rand() < habit.rate(week) && habit.habits.includes('raw_typo')) {
			const typo = swapDigits(rawText);
			if (typo) row.raw = typo;
		}
		raw = Number(row.raw);
		const z = zFromRaw(raw, Number(g.mean), Number(g.sd), t.direction);
		for (const f of t.reported) {
			let v: string | null = fmt(f, referenceScore(f, z, t.bounds));
			if (rand() < habit.rate(week)) {
				const h = pick(habit.habits.filter((x) => x !== 'raw_typo'));
				if (h === 'transposition') v = swapDigits(v) ?? v;
				else if (h === 'sign_flip' && t.direction === 'lower_better') v = fmt(f, referenceScore(f, -z, t.bounds));
				else if (h === 'rounding' && f === 'z') v = roundTo(z, 1).toFixed(1);
				else if (h === 'wrong_norm_group' && other) v = fmt(f, referenceScore(f, zFromRaw(raw, Number(other.mean), Number(other.sd), t.direction), t.bounds));
				else if (h === 'wrong_scale' && f === 'standard') v = String(referenceScore('t', z));
				else if (h === 'missing') v = null;
				else if (h === 'digit_drop' && v.replace(/\D/g, '').length > 1) v = v.slice(0, -1);
			}
			row[f] = v;
		}
		out[t.code] = row;
	}
	return out;
}

/** Plausible true raw scores for an examinee of this ability (z-ish), per test. */
function truthFor(tests: TestInfo[], norms: Awaited<ReturnType<typeof normGroups>>, ability: number): Record<string, number> {
	const out: Record<string, number> = {};
	for (const t of tests) {
		const g = norms.find((n) => n.test_code === t.code && n.group_code === t.groupCode)!;
		const z = Math.max(-2.8, Math.min(2.8, ability + (rand() - 0.5) * 1.6));
		const sign = t.direction === 'lower_better' ? -1 : 1;
		let raw = Number(g.mean) + sign * z * Number(g.sd);
		raw = Math.min(t.raw.max, Math.max(t.raw.min, raw));
		out[t.code] = Number(raw.toFixed(t.raw.decimals));
	}
	return out;
}

async function at(daysAgo: number, hour = 10) {
	const ts = Math.floor(Date.now() / 1000) - Math.round(daysAgo * 86400) + hour * 60;
	await db().query(`SET timestamp = ${ts}`);
}

type Plan = {
	code: string;
	birth: string;
	sex: 'F' | 'M';
	edu: number;
	battery: string;
	first: string;
	second: string;
	reviewer: string;
	daysAgo: number;
	ability: number;
	state: 'draft' | 'draft_started' | 'awaiting_second' | 'in_review' | 'in_review_partly' | 'verified' | 'reopened';
};

const PLANS: Plan[] = [
	{
		code: 'HV-0101',
		birth: '1956-03-14',
		sex: 'F',
		edu: 12,
		battery: 'core-adult',
		first: 'sam',
		second: 'kit',
		reviewer: 'rita',
		daysAgo: 68,
		ability: -0.4,
		state: 'verified'
	},
	{
		code: 'HV-0102',
		birth: '1991-11-02',
		sex: 'M',
		edu: 16,
		battery: 'core-adult',
		first: 'kit',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 63,
		ability: 0.6,
		state: 'verified'
	},
	{
		code: 'HV-0103',
		birth: '1948-07-30',
		sex: 'F',
		edu: 10,
		battery: 'brief-screen',
		first: 'rae',
		second: 'sam',
		reviewer: 'lee',
		daysAgo: 57,
		ability: -1.3,
		state: 'verified'
	},
	{
		code: 'HV-0104',
		birth: '1979-01-19',
		sex: 'M',
		edu: 14,
		battery: 'core-adult',
		first: 'kit',
		second: 'sam',
		reviewer: 'rita',
		daysAgo: 50,
		ability: 0.1,
		state: 'reopened'
	},
	{
		code: 'HV-0105',
		birth: '1965-09-08',
		sex: 'F',
		edu: 18,
		battery: 'core-adult',
		first: 'rae',
		second: 'kit',
		reviewer: 'rita',
		daysAgo: 44,
		ability: 1.1,
		state: 'verified'
	},
	{
		code: 'HV-0106',
		birth: '2001-05-23',
		sex: 'M',
		edu: 13,
		battery: 'brief-screen',
		first: 'sam',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 37,
		ability: -0.2,
		state: 'verified'
	},
	{
		code: 'HV-0107',
		birth: '1952-12-01',
		sex: 'M',
		edu: 11,
		battery: 'core-adult',
		first: 'kit',
		second: 'rae',
		reviewer: 'lee',
		daysAgo: 30,
		ability: -0.9,
		state: 'verified'
	},
	{
		code: 'HV-0108',
		birth: '1987-04-11',
		sex: 'F',
		edu: 17,
		battery: 'core-adult',
		first: 'sam',
		second: 'kit',
		reviewer: 'rita',
		daysAgo: 23,
		ability: 0.4,
		state: 'verified'
	},
	{
		code: 'HV-0109',
		birth: '1944-02-27',
		sex: 'F',
		edu: 9,
		battery: 'core-adult',
		first: 'rae',
		second: 'sam',
		reviewer: 'rita',
		daysAgo: 16,
		ability: -1.6,
		state: 'in_review'
	},
	{
		code: 'HV-0110',
		birth: '1996-08-15',
		sex: 'M',
		edu: 15,
		battery: 'core-adult',
		first: 'kit',
		second: 'sam',
		reviewer: 'rita',
		daysAgo: 11,
		ability: 0.9,
		state: 'in_review_partly'
	},
	{
		code: 'HV-0111',
		birth: '1970-10-05',
		sex: 'F',
		edu: 12,
		battery: 'brief-screen',
		first: 'sam',
		second: 'rae',
		reviewer: 'lee',
		daysAgo: 8,
		ability: 0.0,
		state: 'in_review'
	},
	{
		code: 'HV-0112',
		birth: '1959-06-18',
		sex: 'M',
		edu: 14,
		battery: 'core-adult',
		first: 'rae',
		second: 'kit',
		reviewer: 'rita',
		daysAgo: 5,
		ability: -0.5,
		state: 'in_review'
	},
	{
		code: 'HV-0113',
		birth: '1983-03-09',
		sex: 'F',
		edu: 16,
		battery: 'core-adult',
		first: 'kit',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 3,
		ability: 0.3,
		state: 'awaiting_second'
	},
	{
		code: 'HV-0114',
		birth: '1938-11-21',
		sex: 'M',
		edu: 8,
		battery: 'brief-screen',
		first: 'sam',
		second: 'kit',
		reviewer: 'lee',
		daysAgo: 2,
		ability: -2.0,
		state: 'awaiting_second'
	},
	{
		code: 'HV-0115',
		birth: '1975-07-07',
		sex: 'F',
		edu: 12,
		battery: 'core-adult',
		first: 'sam',
		second: 'rae',
		reviewer: 'rita',
		daysAgo: 1,
		ability: 0.2,
		state: 'draft_started'
	},
	{
		code: 'HV-0116',
		birth: '1999-01-31',
		sex: 'M',
		edu: 14,
		battery: 'brief-screen',
		first: 'rae',
		second: 'sam',
		reviewer: 'rita',
		daysAgo: 0.2,
		ability: 0.5,
		state: 'draft'
	}
];

export async function seedProtocols(): Promise<void> {
	const emails: Record<string, string> = {
		sam: 'sam.scorer@demo.crosstally.test',
		rae: 'rae.scorer@demo.crosstally.test',
		kit: 'kit.scorer@demo.crosstally.test',
		rita: 'rita.reviewer@demo.crosstally.test',
		lee: 'lee.lead@demo.crosstally.test'
	};
	const actors: Record<string, Actor> = {};
	for (const [k, e] of Object.entries(emails)) {
		const u = await getUserByEmail(e);
		if (!u) throw new Error(`demo account ${e} missing`);
		actors[k] = { id: u.id, name: u.name, roles: u.roles };
	}
	const lead = actors.lee;
	const batteries = await select<{ id: number; code: string; norm_set_id: number }>('SELECT id, code, norm_set_id FROM batteries');
	for (const plan of PLANS) {
		const battery = batteries.find((b) => b.code === plan.battery);
		if (!battery) throw new Error(`demo battery ${plan.battery} missing`);
		const week = Math.floor((70 - plan.daysAgo) / 7);
		// the clinic's calendar day (CLINIC_TIME_ZONE): never after its today, which creation refuses
		const testDate = clinicToday(new Date(Date.now() - plan.daysAgo * 86400_000));
		await at(plan.daysAgo + 0.5, 9);
		const id = await createProtocol(
			{
				examinee: { code: plan.code, birthDate: plan.birth, sex: plan.sex, educationYears: plan.edu, name: null },
				batteryId: battery.id,
				testDate,
				firstScorerId: actors[plan.first].id,
				secondScorerId: actors[plan.second].id,
				reviewerId: actors[plan.reviewer].id
			},
			lead
		);
		const p1 = await myPass(id, actors[plan.first]);
		const tests: TestInfo[] = p1.tests.map((t) => ({
			code: t.code,
			direction: t.direction,
			raw: t.raw,
			reported: t.reported,
			bounds: t.bounds as TestInfo['bounds'],
			groupCode: t.groupCode
		}));
		const norms = await normGroups(
			battery.norm_set_id,
			tests.map((t) => t.code)
		);
		const truth = truthFor(tests, norms, plan.ability);
		if (plan.state === 'draft') continue;
		const first = enter(tests, truth, norms, plan.first, week);
		if (plan.state === 'draft_started') {
			const partial = Object.fromEntries(Object.entries(first).slice(0, 4));
			await saveDraft(id, actors[plan.first], { scores: partial, draftVersion: 0 });
			continue;
		}
		await at(plan.daysAgo + 0.3, 11);
		const d1 = await saveDraft(id, actors[plan.first], { scores: first, draftVersion: 0 });
		await submitPass(id, actors[plan.first], { draftVersion: d1.draftVersion });
		await addAttachment(id, lead, pdfFile(plan.code, tests, truth));
		if (plan.state === 'awaiting_second') continue;
		await at(Math.max(0, plan.daysAgo - 0.6), 15);
		const second = enter(tests, truth, norms, plan.second, week);
		const d2 = await saveDraft(id, actors[plan.second], { scores: second, draftVersion: 0 });
		await submitPass(id, actors[plan.second], { draftVersion: d2.draftVersion });
		if (plan.state === 'in_review') continue;

		await at(Math.max(0, plan.daysAgo - 1.2), 10);
		const reviewer = actors[plan.reviewer];
		const list = await reviewView(id, reviewer);
		const todo = plan.state === 'in_review_partly' ? list.discrepancies.slice(0, Math.ceil(list.discrepancies.length / 2)) : list.discrepancies;
		// raw scores first: a raw decision re-judges its test's derived rows (issue 13) and may settle
		// them, so each row is read again before it is decided
		const ordered = [...todo].sort((a, b) => (a.field === 'raw' ? 0 : 1) - (b.field === 'raw' ? 0 : 1));
		for (const listed of ordered) {
			const d = (await reviewView(id, reviewer)).discrepancies.find((x) => x.id === listed.id)!;
			if (d.resolvedAt) continue;
			const trueRaw = String(truth[d.test]);
			if (d.field === 'raw') {
				const choice = Number(d.first) === Number(trueRaw) ? 'first' : Number(d.second) === Number(trueRaw) ? 'second' : 'other';
				await resolveDiscrepancy(d.id, reviewer, {
					choice,
					value: choice === 'other' ? trueRaw : null,
					note: choice === 'other' ? 'Checked against the record form.' : null,
					lockVersion: d.lockVersion
				});
			} else {
				// The reviewer checks the record form: the right value is the look-up for the true raw score.
				const t = tests.find((x) => x.code === d.test)!;
				const g = norms.find((n) => n.test_code === t.code && n.group_code === t.groupCode)!;
				const f = d.field as DerivedField;
				const right = referenceScore(f, zFromRaw(truth[t.code], Number(g.mean), Number(g.sd), t.direction), t.bounds);
				const eq = (v: string | null) => v !== null && Number(v) === right;
				const choice = d.expected !== null && Number(d.expected) === right ? 'recomputed' : eq(d.first) ? 'first' : eq(d.second) ? 'second' : 'other';
				await resolveDiscrepancy(d.id, reviewer, {
					choice,
					value: choice === 'other' ? fmt(f, right) : null,
					note: choice === 'recomputed' ? null : 'Checked against the record form.',
					lockVersion: d.lockVersion
				});
			}
		}
		if (plan.state === 'in_review_partly') continue;
		const fresh = await reviewView(id, reviewer);
		await signOff(id, reviewer, { lockVersion: fresh.protocol.lock_version });
		if (plan.state === 'reopened') {
			await at(Math.max(0, plan.daysAgo - 3), 9);
			await reopen(id, lead, 'Family reported a later birth date; re-check the age band before the report goes out.');
			await at(Math.max(0, plan.daysAgo - 3.5), 14);
			const again = await reviewView(id, reviewer);
			for (const listed of [...again.discrepancies].sort((a, b) => (a.field === 'raw' ? 0 : 1) - (b.field === 'raw' ? 0 : 1))) {
				const d = (await reviewView(id, reviewer)).discrepancies.find((x) => x.id === listed.id)!;
				if (d.resolvedAt) continue;
				const prev = await selectOne<{ resolution: string; resolved_value: string }>(
					'SELECT resolution, resolved_value FROM discrepancies WHERE protocol_id = :p AND round = :r AND position = :pos',
					{
						p: id,
						r: again.protocol.round - 1,
						pos: d.id ? (await selectOne<{ position: number }>('SELECT position FROM discrepancies WHERE id = :id', { id: d.id }))!.position : 0
					}
				);
				const choice = (prev?.resolution ?? 'recomputed') as 'first' | 'second' | 'recomputed' | 'other';
				await resolveDiscrepancy(d.id, reviewer, {
					choice,
					value: choice === 'other' ? prev?.resolved_value : null,
					note: 'Age band confirmed; same value as before.',
					lockVersion: d.lockVersion
				});
			}
			const last = await reviewView(id, reviewer);
			await signOff(id, reviewer, { lockVersion: last.protocol.lock_version });
		}
	}
	// the second battery (tables, composites, bands): a few protocols in different states
	const tidewater = await seedTidewaterProtocols(actors, lead);
	await db().query('SET timestamp = DEFAULT');
	console.error(`[crosstally] seeded ${PLANS.length + tidewater} demo protocols`);
}

function pdfFile(code: string, tests: TestInfo[], truth: Record<string, number>): File {
	const lines = tests.map((t) => `${t.code.padEnd(22, ' ')} raw ${truth[t.code]}`);
	const bytes = recordFormPdf(`Harbourview record form ${code}`, lines);
	return new File([bytes], `record-form-${code}.pdf`, { type: 'application/pdf' });
}

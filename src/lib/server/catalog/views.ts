/**
 * What the catalog screens and the norm-set API show, each read from one consistent snapshot of the
 * catalog (../db.ts `snapshot`): a norm-set PUT that commits while a screen is read never shows its
 * groups half replaced, or counts that disagree with the list. Route files call one of these.
 */
import { snapshot } from '../db';
import { notFoundError } from '../errors';
import { listAllComposites, listBatteries } from './batteries';
import { validationContext } from './io';
import { getNormSet, listNormGroups, listNormSets } from './norms';
import { listDomains, listTests } from './tests';

/** A norm set and its groups (optionally of one test): the norm-set API's GET. */
export function normSetWithGroups(id: number, opts: { test?: string } = {}) {
	return snapshot(async (t) => {
		const normSet = await getNormSet(id, t);
		if (!normSet) throw notFoundError('This norm set');
		return { normSet, groups: await listNormGroups(id, opts, t) };
	});
}

/** The norm set screen: the set, its groups, the tests and composites it may norm, their score spans. */
export function normSetScreen(id: number) {
	return snapshot(async (t) => {
		const set = await getNormSet(id, t);
		if (!set) throw notFoundError('This norm set');
		const [groups, tests, ctx, composites] = await Promise.all([listNormGroups(id, {}, t), listTests({}, t), validationContext(t), listAllComposites(t)]);
		return {
			set,
			groups,
			tests: tests.map((x) => ({ code: x.code, name: x.name })),
			subjects: [
				...tests.map((x) => ({ code: x.code, name: x.name, composite: false })),
				...composites.map((c) => ({ code: c.code, name: c.name, composite: true }))
			],
			spans: ctx.spans ?? {}
		};
	});
}

/** The batteries screen: the batteries, and the tests, domains and norm sets a new battery may use. */
export function batteriesScreen() {
	return snapshot(async (t) => {
		const [batteries, tests, domains, normSets] = await Promise.all([listBatteries(t), listTests({}, t), listDomains(t), listNormSets(t)]);
		return {
			batteries,
			tests: tests.map((x) => ({ code: x.code, name: x.name, domain: x.domain })),
			domains,
			normSets: normSets.map((n) => ({ id: n.id, name: n.name, version: n.version }))
		};
	});
}

/** The tests screen: every current test and the domains. */
export function testsScreen() {
	return snapshot(async (t) => {
		const [tests, domains] = await Promise.all([listTests({}, t), listDomains(t)]);
		return { tests, domains };
	});
}

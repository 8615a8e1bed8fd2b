/**
 * Protocols: creation (with separation of duties and automatic norm groups), who may see what
 * (object-level access and the blind rule), and the protocol view.
 */
import { select, selectOne, transaction, isUniqueViolation, isLockConflict, type Tx } from '../db';
import { recordEvent } from '../trail';
import { getUser } from '../users';
import { batteryTests, batteryComposites, normGroups, normSet, groupDef, protocolTests } from '../catalog';
import { selectNormGroup, dayNumber, parseIsoDate, type AgeWarning } from '../../scoring/age';
import { ageCovariate, COVARIATE_LABELS, type Covariate } from '../../catalog/norm-forms';
import { groupWords } from '../../catalog/ranges';
import { models } from '../models';
import { ServiceError, notFound, invalid, conflict } from '../errors';
import { inTx, reading, saveLocked, type Protocol, type ProtocolRow, type Status } from '../models/protocol';
import { notifyReviewerChanged } from '../mail/reminders/scheduling';
import { clinicToday } from '../clock';
import { dateProblem } from '../../dates';
import { cleanFilename } from '../filenames';
import type { Role } from '../../roles';
import { protocolVerification, singlePassIds } from '../verification';

export type { ProtocolRow, Status };
export type Duty = 'first' | 'second' | 'reviewer' | 'lead';

export interface Actor {
	id: number;
	name: string;
	roles: Role[];
}

export function dutiesOf(p: Pick<ProtocolRow, 'first_scorer_id' | 'second_scorer_id' | 'reviewer_id'>, user: Actor): Duty[] {
	const d: Duty[] = [];
	if (p.first_scorer_id === user.id && user.roles.includes('scorer')) d.push('first');
	if (p.second_scorer_id === user.id && user.roles.includes('scorer')) d.push('second');
	if (p.reviewer_id === user.id && user.roles.includes('reviewer')) d.push('reviewer');
	if (user.roles.includes('lead')) d.push('lead');
	return d;
}

/** The protocol by its id (locked FOR UPDATE inside `t` when asked): the model instance, so a service can save it under its lock_version. */
export async function getProtocolRow(id: number, t?: Tx, forUpdate = false): Promise<Protocol | null> {
	const { Protocol } = models();
	return reading(t, () => Protocol.findByPk(id, inTx(t, forUpdate)));
}

/** The protocol if this user has a duty on it (leads see all); otherwise 404, so ids cannot be probed. */
export async function protocolFor(id: number, user: Actor, t?: Tx, forUpdate = false): Promise<{ p: Protocol; duties: Duty[] }> {
	const p = await getProtocolRow(id, t, forUpdate);
	if (!p) throw notFound();
	const duties = dutiesOf(p, user);
	if (duties.length === 0) throw notFound();
	return { p, duties };
}

/** Blind rule: both passes are visible to anyone only once the second pass is submitted. */
export const passesRevealed = (status: Status) => status === 'in_review' || status === 'verified';

/** One of the protocol's two assigned scorers, whatever roles the account holds now. */
export const isAssignedScorer = (p: Pick<ProtocolRow, 'first_scorer_id' | 'second_scorer_id'>, user: Pick<Actor, 'id'>) =>
	p.first_scorer_id === user.id || p.second_scorer_id === user.id;

/**
 * The blind rule follows the assignment, not the roles held now: while the passes are not revealed,
 * an assigned scorer sees nothing of the other pass, even after losing the scorer role or while
 * also holding lead, reviewer or admin (roles can be edited; the assignment is what made them a
 * scorer of this protocol).
 */
export const isBlind = (p: Pick<ProtocolRow, 'status' | 'first_scorer_id' | 'second_scorer_id'>, user: Pick<Actor, 'id'>) =>
	!passesRevealed(p.status) && isAssignedScorer(p, user);

/** While blind, files the other assigned scorer uploaded are not shown (they may show their entries). */
export const attachmentHidden = (p: Pick<ProtocolRow, 'status' | 'first_scorer_id' | 'second_scorer_id'>, user: Pick<Actor, 'id'>, uploadedBy: number | null) =>
	isBlind(p, user) && uploadedBy !== user.id && uploadedBy !== null && (uploadedBy === p.first_scorer_id || uploadedBy === p.second_scorer_id);

// ---------------------------------------------------------------- creation

export interface NewProtocol {
	examinee: { code: string; birthDate?: string; sex?: 'F' | 'M' | 'X' | null; educationYears?: number | null; name?: string | null };
	batteryId: number;
	normSetId?: number | null;
	testDate: string;
	firstScorerId: number;
	secondScorerId: number;
	reviewerId: number;
	/** test code → { groupCode, reason } */
	overrides?: Record<string, { groupCode: string; reason: string }>;
}

export interface GroupPlan {
	/** A composite's plan entry (its norm group), after the tests. */
	composite?: boolean;
	testCode: string;
	testName: string;
	groupCode: string | null;
	groupId: number | null;
	warnings: AgeWarning[];
}

async function checkDuties(first: number, second: number, reviewer: number, t: Tx) {
	if (first === second) throw invalid('The two scorers must be different people.', 'secondScorerId');
	if (reviewer === first || reviewer === second) throw invalid('The reviewer cannot be one of the scorers.', 'reviewerId');
	for (const [id, role, field] of [
		[first, 'scorer', 'firstScorerId'],
		[second, 'scorer', 'secondScorerId'],
		[reviewer, 'reviewer', 'reviewerId']
	] as const) {
		const u = await getUser(id, t);
		if (!u || !u.active) throw invalid('Choose an active account.', field);
		if (!u.roles.includes(role)) throw invalid(`${u.name} does not hold the ${role} role.`, field);
	}
}

/** Age, norm group per test and warnings for an examinee and test date (also used for the preview). */
export async function planGroups(
	batteryId: number,
	normSetId: number,
	ex: { birthDate: string; sex?: string | null; educationYears?: number | null },
	testDate: string,
	t?: Tx
) {
	const set = await normSet(normSetId, t);
	if (!set) throw invalid('Choose a norm set.', 'normSetId');
	const tests = await batteryTests(batteryId, t);
	if (tests.length === 0) throw invalid('This battery has no tests.', 'batteryId');
	const composites = await batteryComposites(batteryId, t);
	const groups = await normGroups(normSetId, [...tests.map((x) => x.code), ...composites.map((c) => c.code)], t);
	let age: ReturnType<typeof selectNormGroup>['age'] | null = null;
	const planOne = (code: string, name: string, composite: boolean): GroupPlan => {
		const mine = groups.filter((g) => g.test_code === code);
		// The norm set's own age rule (borrowing, rounding): instruments differ in how age is computed.
		const sel = selectNormGroup(
			ex.birthDate,
			testDate,
			mine.map(groupDef),
			{ sex: ex.sex === 'X' ? null : ex.sex, educationYears: ex.educationYears },
			{ rule: set.rule, today: clinicToday() }
		);
		age = sel.age;
		const row = sel.group ? mine.find((g) => g.group_code === sel.group!.id) : undefined;
		return {
			...(composite ? { composite: true } : {}),
			testCode: code,
			testName: name,
			groupCode: row?.group_code ?? null,
			groupId: row?.id ?? null,
			warnings: sel.warnings
		};
	};
	const plan: GroupPlan[] = [...tests.map((test) => planOne(test.code, test.name, false)), ...composites.map((c) => planOne(c.code, c.name, true))];
	return { set, tests, composites, groups, plan, age: age! };
}

/**
 * The covariates regression norms take (shared/spec/reconcile.md, "Norm forms"): age as the norm
 * set says (whole or decimal years), years of education, sex (female 1, male 0). Every regression
 * norm of the protocol's tests must find its covariates (the engine needs them for every group,
 * used or not), so a missing one refuses the protocol, naming the test and the covariate.
 */
export function covariatesFor(
	groups: ({ test_code: string; group_code: string; form?: string; coefficients?: unknown } & Parameters<typeof groupWords>[0])[],
	rule: 'whole_years' | 'decimal_years',
	ex: { birthDate: string; sex?: string | null; educationYears?: number | null },
	age: { years: number },
	testDate: string,
	testName: (code: string) => string
): Record<string, number> | null {
	const regression = groups.filter((g) => g.form === 'regression');
	if (!regression.length) return null;
	const days = dayNumber(parseIsoDate(testDate)) - dayNumber(parseIsoDate(ex.birthDate));
	const have: Partial<Record<Covariate, number>> = { age: ageCovariate(rule, age, days) };
	if (ex.educationYears !== null && ex.educationYears !== undefined) have.education = Number(ex.educationYears);
	if (ex.sex === 'F') have.sex = 1;
	else if (ex.sex === 'M') have.sex = 0;
	for (const g of regression) {
		for (const k of Object.keys((g.coefficients ?? {}) as object) as Covariate[]) {
			if (have[k] === undefined)
				throw invalid(
					`${testName(g.test_code)} is normed by a regression equation (norm group for ${groupWords(g)}) that needs ${COVARIATE_LABELS[k].toLowerCase()}; the examinee's record has none.`,
					k === 'education' ? 'educationYears' : k === 'sex' ? 'sex' : 'birthDate'
				);
		}
	}
	return have;
}

/** A test of the battery that no norm group covers for this examinee: the groups a lead may choose from. */
export interface UncoveredTest {
	testCode: string;
	testName: string;
	message: string;
	groups: { code: string; label: string }[];
}

export async function createProtocol(input: NewProtocol, actor: Actor): Promise<number> {
	if (input.examinee.birthDate) {
		const problem = dateProblem(input.examinee.birthDate);
		if (problem) throw invalid(`Birth date: ${problem}`, 'birthDate');
	}
	const testDateProblem = dateProblem(input.testDate);
	if (testDateProblem) throw invalid(`Test date: ${testDateProblem}`, 'testDate');
	const today = clinicToday();
	if (input.testDate > today) throw invalid(`The test date ${input.testDate} is after today (${today}): enter the day the tests were given.`, 'testDate');
	try {
		return await insertProtocol(input, actor);
	} catch (e) {
		// Two leads creating the first protocol of one new examinee code at the same moment: the unique
		// key (or InnoDB's deadlock check on the gap lock) refuses the second; nothing of it was written.
		if (isUniqueViolation(e) || isLockConflict(e))
			throw new ServiceError(
				409,
				`Examinee code ${input.examinee.code} was being created by someone else at the same moment; nothing was saved. Submit again to use it.`,
				'code',
				'conflict'
			);
		throw e;
	}
}

async function insertProtocol(input: NewProtocol, actor: Actor): Promise<number> {
	return transaction(async (t) => {
		await checkDuties(input.firstScorerId, input.secondScorerId, input.reviewerId, t);
		const battery = await selectOne<{ id: number; norm_set_id: number | null }>(
			'SELECT id, norm_set_id FROM batteries WHERE id = :id',
			{ id: input.batteryId },
			t
		);
		if (!battery) throw invalid('Choose a battery.', 'batteryId');
		const normSetId = input.normSetId ?? battery.norm_set_id;
		if (!normSetId) throw invalid('Choose a norm set.', 'normSetId');

		const { Examinee, Protocol, ProtocolTest, Pass, ProtocolComposite } = models();
		let ex = await Examinee.findOne({ where: { code: input.examinee.code }, ...inTx(t, true) });
		if (!ex) {
			if (!input.examinee.birthDate) throw invalid('A new examinee needs a birth date.', 'birthDate');
			ex = await Examinee.create(
				{
					code: input.examinee.code,
					name: input.examinee.name || null,
					birth_date: input.examinee.birthDate,
					sex: input.examinee.sex ?? null,
					education_years: input.examinee.educationYears ?? null,
					created_by: actor.id
				},
				{ transaction: t }
			);
			await recordEvent({ actorId: actor.id, entity: 'examinee', entityId: ex.id, action: 'create', newValue: { code: input.examinee.code } }, t);
		} else if (input.examinee.birthDate && input.examinee.birthDate !== ex.birth_date) {
			// Never guess which is right: a mistyped code would attach this protocol to someone else.
			throw invalid(
				`Examinee ${input.examinee.code} is on record with birth date ${ex.birth_date}, not ${input.examinee.birthDate}. Check the code; if it is the same person, leave the birth date empty (the recorded one is used) or correct the record first.`,
				'birthDate'
			);
		}
		if (input.testDate < ex.birth_date) throw invalid('The test date is before the birth date.', 'testDate');

		const exInfo = { birthDate: ex.birth_date, sex: ex.sex, educationYears: ex.education_years };
		const { plan, groups, age, set, composites } = await planGroups(input.batteryId, normSetId, exInfo, input.testDate, t);
		const tests = await batteryTests(input.batteryId, t);
		const names = new Map([...tests.map((x) => [x.code, x.name] as const), ...composites.map((c) => [c.code, c.name] as const)]);
		const covariates = covariatesFor(groups, set.covariate_age ?? 'whole_years', exInfo, age, input.testDate, (c) => names.get(c) ?? c);
		const { id: protocolId } = await Protocol.create(
			{
				examinee_id: ex.id,
				battery_id: input.batteryId,
				norm_set_id: normSetId,
				test_date: input.testDate,
				age_text: age.text,
				age_months: age.totalMonths,
				covariates,
				first_scorer_id: input.firstScorerId,
				second_scorer_id: input.secondScorerId,
				reviewer_id: input.reviewerId,
				created_by: actor.id
			},
			{ transaction: t }
		);
		// Tests no group covers: each needs a group chosen by the lead, with a reason. When one is missing
		// or unusable, the answer lists every such test with the groups to choose from (the form shows them).
		const uncovered: UncoveredTest[] = [];
		for (const [i, test] of tests.entries()) {
			if (plan[i].groupId) continue;
			const o = input.overrides?.[test.code];
			const mine = groups.filter((g) => g.test_code === test.code);
			let message: string | null = null;
			// groups split by education cannot fit an examinee whose education is not recorded: say that, not the age
			const byEducation = (ex.education_years === null || ex.education_years === undefined) && mine.some((g) => g.edu_min !== null || g.edu_max !== null);
			if (!o?.groupCode)
				message = byEducation
					? `The norm groups of ${test.name} are split by years of education, which is not recorded for this examinee: enter it, or choose a group with a reason.`
					: `No norm group of this norm set covers age ${age.text} for ${test.name}; choose one with a reason.`;
			else if (!mine.some((g) => g.group_code === o.groupCode)) message = `Norm group ${o.groupCode} does not exist for ${test.name}.`;
			else if (!o.reason || o.reason.trim().length < 5)
				message = `Give a reason for using the norm group for ${groupWords(mine.find((g) => g.group_code === o.groupCode)!)} for ${test.name} (at least a few words).`;
			uncovered.push({
				testCode: test.code,
				testName: test.name,
				message: message ?? '',
				groups: mine.map((g) => ({
					code: g.group_code,
					label: groupWords(g)
				}))
			});
		}
		const problems = uncovered.filter((u) => u.message);
		if (problems.length)
			throw new ServiceError(
				422,
				problems.length === 1 ? problems[0].message : `No norm group covers age ${age.text} for ${problems.length} tests; choose one for each, with a reason.`,
				`overrides.${problems[0].testCode}`,
				'no_group',
				{ uncovered }
			);
		for (const [i, test] of tests.entries()) {
			const o = input.overrides?.[test.code];
			let groupId = plan[i].groupId;
			let reason: string | null = null;
			if (o && o.groupCode !== plan[i].groupCode) {
				const g = groups.find((x) => x.test_code === test.code && x.group_code === o.groupCode);
				if (!g) throw invalid(`Norm group ${o.groupCode} does not exist for ${test.name}.`, `overrides.${test.code}`);
				if (!o.reason || o.reason.trim().length < 5) throw invalid(`Give a reason for overriding the norm group of ${test.name}.`, `overrides.${test.code}`);
				groupId = g.id;
				reason = o.reason.trim();
			}
			if (!groupId) throw invalid(`No norm group of this norm set covers this examinee for ${test.name}; choose one with a reason.`, `overrides.${test.code}`);
			await ProtocolTest.create(
				{ protocol_id: protocolId, position: i + 1, test_id: test.id, norm_group_id: groupId, override_reason: reason },
				{ transaction: t }
			);
			if (reason) {
				await recordEvent(
					{
						actorId: actor.id,
						entity: 'protocol',
						entityId: protocolId,
						protocolId,
						action: 'norm_group_override',
						oldValue: { test: test.code, group: plan[i].groupCode },
						newValue: { test: test.code, group: o!.groupCode },
						reason
					},
					t
				);
			}
		}
		// Composites are frozen as defined now, with the norm group that covers the examinee.
		for (const [i, c] of composites.entries()) {
			const entry = plan[tests.length + i];
			if (!entry.groupId)
				throw invalid(`No norm group of this norm set covers this examinee for the composite ${c.name}; add one to the norm set first.`, 'normSetId');
			await ProtocolComposite.create(
				{ protocol_id: protocolId, position: i + 1, code: c.code, definition: c, norm_group_id: entry.groupId },
				{ transaction: t }
			);
		}
		await Pass.bulkCreate(
			[
				{ protocol_id: protocolId, round: 1, which: 'first', scorer_id: input.firstScorerId, scores: {} },
				{ protocol_id: protocolId, round: 1, which: 'second', scorer_id: input.secondScorerId, scores: {} }
			],
			{ transaction: t }
		);
		await recordEvent(
			{
				actorId: actor.id,
				entity: 'protocol',
				entityId: protocolId,
				protocolId,
				action: 'create',
				newValue: {
					examinee: input.examinee.code,
					battery: input.batteryId,
					normSet: normSetId,
					testDate: input.testDate,
					age: age.text,
					first: input.firstScorerId,
					second: input.secondScorerId,
					reviewer: input.reviewerId
				}
			},
			t
		);
		return protocolId;
	});
}

// ---------------------------------------------------------------- assignments

/**
 * A lead changes an assignment; never two duties on one protocol; a submitted pass keeps its scorer.
 * A new reviewer of a protocol in review is told in the same transaction (the e-mail is in the outbox
 * only if the change commits).
 */
export async function reassign(protocolId: number, duty: 'first' | 'second' | 'reviewer', userId: number, reason: string, actor: Actor) {
	if (!reason || reason.trim().length < 5) throw invalid('Give a reason for the change.', 'reason');
	return transaction(async (t) => {
		const { p } = await protocolFor(protocolId, actor, t, true);
		if (p.status === 'verified') throw conflict('A verified protocol is locked. Reopen it first.');
		const next = { first: p.first_scorer_id, second: p.second_scorer_id, reviewer: p.reviewer_id, [duty]: userId };
		await checkDuties(next.first, next.second, next.reviewer, t);
		if (duty !== 'reviewer') {
			const pass = await models().Pass.findOne({ where: { protocol_id: p.id, round: p.round, which: duty }, ...inTx(t, true) });
			if (pass?.status === 'submitted') throw conflict('That pass is already submitted; its scorer can no longer change.');
			// the new scorer starts from an empty draft; a tab of the old one holds a stale draft_version
			await pass?.update({ scorer_id: userId, scores: {}, fields_entered: 0, draft_version: pass.draft_version + 1 }, { transaction: t });
		}
		const column = duty === 'first' ? 'first_scorer_id' : duty === 'second' ? 'second_scorer_id' : 'reviewer_id';
		const before = p[column];
		p.set(column, userId);
		await saveLocked(p, t, () => conflict('This protocol changed at the same moment; reload and try again.'));
		await recordEvent(
			{
				actorId: actor.id,
				entity: 'protocol',
				entityId: p.id,
				protocolId: p.id,
				action: `assign_${duty}`,
				oldValue: before,
				newValue: userId,
				reason: reason.trim()
			},
			t
		);
		if (duty === 'reviewer' && p.status === 'in_review') await notifyReviewerChanged(p.id, p.round, userId, t);
	});
}

// ---------------------------------------------------------------- lists

export interface ProtocolListItem {
	id: number;
	code: string;
	battery: string;
	test_date: string;
	status: Status;
	round: number;
	first_name: string;
	second_name: string;
	reviewer_name: string;
	status_changed_at: Date;
	open_discrepancies: number;
}

/** The protocol columns that give this user a protocol in the list; null for a lead (every protocol). */
function dutyColumns(user: Actor): string[] | null {
	if (user.roles.includes('lead')) return null;
	return [...(user.roles.includes('scorer') ? ['first_scorer_id', 'second_scorer_id'] : []), ...(user.roles.includes('reviewer') ? ['reviewer_id'] : [])];
}

/**
 * Protocols this user has a duty on (leads: all), newest first, paginated. A scorer's protocols are
 * those they are first or second scorer of (each current scorer holds the round's pass: created with
 * the protocol, moved by reassign).
 *
 * Not a lead: one branch per duty column, each read from that column's index alone (protocols_first,
 * protocols_second, protocols_reviewer: the duty, status, then the primary key); the page's ids are
 * the branches' UNION ALL, newest first, and only the page's rows are read in full; the count adds
 * up the branches' counts. The CHECK protocols_duties keeps the duty columns of a row different, so
 * no protocol is in two branches. With the filter as one WHERE (an OR over the duties, reached
 * through passes), a scorer holding 45 % of 26,000 protocols cost 145 ms a page (an index merge that
 * fetched and sorted every one of their rows) and the count read the whole table (bench:db's one
 * full scan); as branches, 27 ms and the same rows (issue 18).
 */
export async function listProtocols(user: Actor, opts: { status?: Status | null; q?: string | null; page?: number; perPage?: number } = {}) {
	const perPage = Math.min(100, Math.max(10, opts.perPage ?? 25));
	const page = Number.isSafeInteger(opts.page) ? Math.max(1, opts.page!) : 1;
	const params: Record<string, unknown> = { uid: user.id, limit: perPage, offset: (page - 1) * perPage };
	const filter: string[] = [];
	if (opts.status) {
		filter.push('p.status = :status');
		params.status = opts.status;
	}
	if (opts.q) {
		filter.push('e.code LIKE :q');
		params.q = `%${opts.q.replace(/[%_\\]/g, '\\$&')}%`;
	}
	const where = (w: string[]) => (w.length ? `WHERE ${w.join(' AND ')}` : '');
	// the examinee only when searching by its code: a count then reads an index of protocols alone
	const examinee = opts.q ? 'JOIN examinees e ON e.id = p.examinee_id' : '';
	const columns = dutyColumns(user);
	if (columns?.length === 0) return { rows: [], total: 0, page, perPage };
	const branches = columns
		? columns.map((c) => `FROM protocols p ${examinee} ${where([`p.${c} = :uid`, ...filter])}`)
		: [`FROM protocols p ${examinee} ${where(filter)}`];
	// joins over catalog tables, a count per row and pagination: one statement is what the list needs.
	// STRAIGHT_JOIN keeps protocols first, so ORDER BY p.id DESC LIMIT walks the primary key (a lead) or
	// the page's ids (the others) and stops at the page (the optimizer otherwise put the four-row
	// batteries table first, which meant a full scan of protocols, a temporary table and a sort).
	// FORCE INDEX on batteries: read by its key per row, not scanned into a join buffer, which also
	// forced the temporary table and sort (bench:db).
	const rows = await select<ProtocolListItem>(
		`SELECT STRAIGHT_JOIN p.id, e.code, b.name AS battery, p.test_date, p.status, p.round, f.name AS first_name, s.name AS second_name, r.name AS reviewer_name,
		        p.status_changed_at,
		        (SELECT COUNT(*) FROM discrepancies d WHERE d.protocol_id = p.id AND d.round = p.round AND d.resolved_at IS NULL) AS open_discrepancies
		   FROM ${columns ? `(${branches.map((b) => `SELECT p.id ${b}`).join(' UNION ALL ')} ORDER BY id DESC LIMIT :limit OFFSET :offset) page JOIN protocols p ON p.id = page.id` : 'protocols p'}
		   JOIN examinees e ON e.id = p.examinee_id
		   JOIN batteries b FORCE INDEX (PRIMARY) ON b.id = p.battery_id
		   JOIN users f ON f.id = p.first_scorer_id
		   JOIN users s ON s.id = p.second_scorer_id
		   JOIN users r ON r.id = p.reviewer_id
		   ${columns ? 'ORDER BY p.id DESC' : `${where(filter)} ORDER BY p.id DESC LIMIT :limit OFFSET :offset`}`,
		params
	);
	const total = await selectOne<{ n: number }>(`SELECT ${branches.map((b) => `(SELECT COUNT(*) ${b})`).join(' + ')} AS n`, params);
	// a scorer learns whether a protocol is single pass only once it is in review (after the first submit)
	const single = await singlePassIds(rows.filter((r) => r.status === 'in_review' || r.status === 'verified').map((r) => r.id));
	return { rows: rows.map((r) => ({ ...r, single_pass: single.has(r.id) })), total: Number(total?.n ?? 0), page, perPage };
}

export interface WorkItem {
	kind: 'enter_first' | 'enter_second' | 'review' | 'sign_off';
	protocolId: number;
	code: string;
	battery: string;
	since: Date;
	status: Status;
	open: number;
	draftStarted: boolean;
	/** Reviews only: the protocol was entered once (not drawn for a second pass). */
	singlePass?: boolean;
}

/** What is waiting for this user, oldest first: at most `limit` items of each kind (the oldest). */
export const WORKLIST_LIMIT = 50;
export async function worklist(user: Actor, limit = WORKLIST_LIMIT): Promise<WorkItem[]> {
	const items: WorkItem[] = [];
	if (user.roles.includes('scorer')) {
		// one joined statement per kind of work (the worklist is read on every page load); batteries
		// by key, not scanned into a join buffer (which added a temporary table to the sort)
		const rows = await select<{ id: number; code: string; battery: string; which: 'first' | 'second'; since: Date; status: Status; draft_version: number }>(
			`SELECT p.id, e.code, b.name AS battery, pa.which, p.created_at AS since, p.status, pa.draft_version
			   FROM passes pa
			   JOIN protocols p ON p.id = pa.protocol_id AND pa.round = p.round
			   JOIN examinees e ON e.id = p.examinee_id
			   JOIN batteries b FORCE INDEX (PRIMARY) ON b.id = p.battery_id
			  WHERE pa.scorer_id = :uid AND pa.status = 'draft' AND p.status IN ('draft', 'awaiting_second')
			  ORDER BY p.created_at, p.id LIMIT :limit`,
			{ uid: user.id, limit }
		);
		for (const r of rows)
			items.push({
				kind: r.which === 'first' ? 'enter_first' : 'enter_second',
				protocolId: r.id,
				code: r.code,
				battery: r.battery,
				since: r.since,
				status: r.status,
				open: 0,
				draftStarted: r.draft_version > 0
			});
	}
	if (user.roles.includes('reviewer')) {
		// STRAIGHT_JOIN and batteries by key, as in listProtocols: the optimizer scanned the three-row
		// batteries into a join buffer, which forced a temporary table and a sort of every protocol in
		// review of this reviewer, each with its open count computed, before the LIMIT (bench:http's
		// reviewer worklist: 10× the floor's p95). Now protocols_reviewer_age is read in the order
		// asked and the read stops at the limit (EXPLAIN: ref, no temporary, no filesort).
		const rows = await select<{ id: number; code: string; battery: string; since: Date; status: Status; open: number }>(
			`SELECT STRAIGHT_JOIN p.id, e.code, b.name AS battery, p.status_changed_at AS since, p.status,
			        (SELECT COUNT(*) FROM discrepancies d WHERE d.protocol_id = p.id AND d.round = p.round AND d.resolved_at IS NULL) AS open
			   FROM protocols p
			   JOIN examinees e ON e.id = p.examinee_id
			   JOIN batteries b FORCE INDEX (PRIMARY) ON b.id = p.battery_id
			  WHERE p.reviewer_id = :uid AND p.status = 'in_review'
			  ORDER BY p.status_changed_at, p.id LIMIT :limit`,
			{ uid: user.id, limit }
		);
		for (const r of rows)
			items.push({
				kind: Number(r.open) > 0 ? 'review' : 'sign_off',
				protocolId: r.id,
				code: r.code,
				battery: r.battery,
				since: r.since,
				status: r.status,
				open: Number(r.open),
				draftStarted: false
			});
	}
	const single = await singlePassIds(items.filter((i) => i.kind === 'review' || i.kind === 'sign_off').map((i) => i.protocolId));
	for (const i of items) if (single.has(i.protocolId)) i.singlePass = true;
	return items.sort((a, b) => new Date(a.since).getTime() - new Date(b.since).getTime());
}

// ---------------------------------------------------------------- view

/** The protocol's record forms this user may see (while blind, not the other scorer's uploads). */
async function visibleAttachments(p: Protocol, user: Actor) {
	const rows = await reading(null, () =>
		models().Attachment.findAll({
			attributes: ['id', 'filename', 'mime', 'size', 'sha256', 'created_at', 'uploaded_by'],
			where: { protocol_id: p.id },
			order: [['id', 'ASC']],
			raw: true
		})
	);
	return rows
		.filter((a) => !attachmentHidden(p, user, a.uploaded_by))
		.map((a) => ({ id: a.id, filename: cleanFilename(a.filename, 'record-form'), mime: a.mime, size: a.size, sha256: a.sha256, created_at: a.created_at }));
}

/**
 * What the Review screen shows of the protocol besides its discrepancies: the examinee's code, the
 * battery, who is assigned and the record forms. Two statements after the access check, where
 * protocolView (the protocol page: tests, groups, passes, verification …) runs about a dozen; the
 * Review page is the most requested page under load (test:load).
 */
export async function protocolHeader(id: number, user: Actor) {
	const { p } = await protocolFor(id, user);
	const head = await selectOne<{ code: string; battery: string; first: string | null; second: string | null; reviewer: string | null }>(
		`SELECT e.code, b.name AS battery, f.name AS first, s.name AS second, r.name AS reviewer
		   FROM examinees e JOIN batteries b ON b.id = :battery
		   LEFT JOIN users f ON f.id = :first LEFT JOIN users s ON s.id = :second LEFT JOIN users r ON r.id = :reviewer
		  WHERE e.id = :examinee`,
		{ examinee: p.examinee_id, battery: p.battery_id, first: p.first_scorer_id, second: p.second_scorer_id, reviewer: p.reviewer_id }
	);
	return {
		examinee: { code: head!.code },
		battery: { name: head!.battery },
		assignments: { first: head!.first ?? '—', second: head!.second ?? '—', reviewer: head!.reviewer ?? '—' },
		attachments: await visibleAttachments(p, user)
	};
}

export async function protocolView(id: number, user: Actor) {
	const { p, duties } = await protocolFor(id, user);
	const staffView = duties.includes('lead') || duties.includes('reviewer');
	const { Examinee, Pass } = models();
	const ex = await reading(null, () => Examinee.findByPk(p.examinee_id, { raw: true }));
	// batteries and users are catalog tables (their models belong to the catalog services)
	const battery = await selectOne<{ code: string; name: string }>('SELECT code, name FROM batteries WHERE id = :id', { id: p.battery_id });
	const set = await normSet(p.norm_set_id);
	const tests = await protocolTests(p.id);
	// every group of the protocol's tests in words, for history lines that name a group by its code
	const groupText: Record<string, Record<string, string>> = {};
	for (const g of await normGroups(
		p.norm_set_id,
		tests.map((x) => x.code)
	))
		(groupText[g.test_code] ??= {})[g.group_code] = groupWords(g);
	const people = await select<{ id: number; name: string }>('SELECT id, name FROM users WHERE id IN (:ids)', {
		ids: [p.first_scorer_id, p.second_scorer_id, p.reviewer_id]
	});
	const nameOf = (uid: number) => people.find((x) => x.id === uid)?.name ?? '—';
	const passes = await reading(null, () =>
		Pass.findAll({
			attributes: ['which', 'status', 'submitted_at', 'fields_entered', 'updated_at', 'draft_version'],
			where: { protocol_id: p.id, round: p.round },
			order: [['which', 'ASC']],
			raw: true
		})
	);
	// an aggregate: both counts in one statement
	const open = await selectOne<{ open: number; total: number }>(
		'SELECT SUM(resolved_at IS NULL) AS open, COUNT(*) AS total FROM discrepancies WHERE protocol_id = :p AND round = :r',
		{ p: p.id, r: p.round }
	);
	const attachments = await visibleAttachments(p, user);
	return {
		protocol: p.get({ plain: true }) as ProtocolRow,
		duties,
		examinee: {
			code: ex!.code,
			// Names and birth dates are for leads and reviewers; scorers see the code and the age.
			name: staffView ? ex!.name : null,
			birthDate: staffView ? ex!.birth_date : null,
			sex: ex!.sex,
			educationYears: ex!.education_years
		},
		battery: battery!,
		normSet: set ? { name: set.name, version: set.version, source: set.source } : null,
		tests: tests.map((x) => ({
			code: x.code,
			name: x.name,
			domain: x.domainName,
			group: x.groupText,
			overrideReason: x.overrideReason,
			version: x.version,
			reported: x.reported as string[]
		})),
		groupText,
		/** composites' names too, for history lines about a composite's cards */
		compositeNames: Object.fromEntries((await batteryComposites(p.battery_id)).map((c) => [c.code, c.name])),
		assignments: { first: nameOf(p.first_scorer_id), second: nameOf(p.second_scorer_id), reviewer: nameOf(p.reviewer_id) },
		passes: passes.map((x) => ({
			which: x.which,
			status: x.status,
			submittedAt: x.submitted_at,
			fieldsEntered: x.fields_entered,
			started: x.draft_version > 0
		})),
		discrepancies: { open: Number(open?.open ?? 0), total: Number(open?.total ?? 0) },
		attachments,
		verification: await protocolVerification(p, duties)
	};
}

/** Status history for the protocol page. Before both passes are in, values of passes are hidden. */
export async function protocolHistoryFor(id: number, user: Actor) {
	const { p } = await protocolFor(id, user);
	// the trail joined with who acted (audit_events has no model: it is append-only, written by recordEvent)
	const all = await select<{
		id: number;
		at: Date;
		actor_id: number | null;
		actor_name: string | null;
		action: string;
		old_value: string | null;
		new_value: string | null;
		reason: string | null;
		entity: string;
	}>(
		`SELECT a.id, a.at, a.actor_id, u.name AS actor_name, a.action, a.old_value, a.new_value, a.reason, a.entity
		   FROM audit_events a LEFT JOIN users u ON u.id = a.actor_id WHERE a.protocol_id = :p ORDER BY a.id`,
		{ p: p.id }
	);
	// uploads the other scorer made are not there for a blind scorer (nor their file: attachmentHidden)
	const rows = all.filter((r) => !(r.entity === 'attachment' && attachmentHidden(p, user, r.actor_id))).map(({ actor_id: _a, ...r }) => r);
	// Pass values: for everyone once revealed; before that for leads who are not its scorers (an
	// assigned scorer never, whatever roles they hold now: isBlind).
	const reveal = passesRevealed(p.status) || (user.roles.includes('lead') && !isBlind(p, user));
	return rows.map((r) => ({
		...r,
		old_value: r.entity === 'pass' && !reveal ? null : r.old_value,
		new_value: r.entity === 'pass' && !reveal ? null : r.new_value
	}));
}

export { ServiceError };

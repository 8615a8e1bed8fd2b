/**
 * The database itself refuses a discrepancy with a kind outside the contract's list and a partial
 * decision (migration 00024): statements go straight to MariaDB through the SQL helper, past every
 * service and model validation, so what is asserted is the table's CHECK, not our code.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { exec, selectOne } from '../../src/lib/server/db';
import { cleanupFixtures, createReviewProtocol, userId, type Fixture } from '../helpers/review-fixtures';
import { ACCOUNTS } from '../helpers/http';

// The kinds of shared/spec/reconcile.md ("Kinds", the table of kinds in their order), copied by hand.
const CONTRACT_KINDS = [
	'missing',
	'follows_other_raw',
	'carried',
	'sum_error',
	'sign_flip',
	'wrong_norm_group',
	'adjacent_row',
	'wrong_scale',
	'raw_as_derived',
	'decimal_shift',
	'transposition',
	'rounding',
	'digit_drop',
	'digit_extra',
	'wrong_digit',
	'out_of_range',
	'mismatch'
];

let f: Fixture;
let reviewer: number;
let position = 100;

/** Insert one discrepancy row of the fixture protocol; the database's answer (an id, or its error). */
const insert = (cols: Record<string, unknown>) => {
	const row = { protocol_id: f.protocolId, round: 1, position: ++position, test_code: 'nt-recall', field: 'z', pass: 'first', kind: 'sign_flip', ...cols };
	const names = Object.keys(row);
	return exec(`INSERT INTO discrepancies (${names.join(', ')}) VALUES (${names.map((n) => `:${n}`).join(', ')})`, row);
};

/** MariaDB's refusal names the constraint (error 4025, ER_CONSTRAINT_FAILED). */
const refusedBy = async (p: Promise<unknown>, constraint: string) => {
	const e = (await p.then(
		() => null,
		(x: unknown) => x
	)) as { original?: { errno?: number; message?: string } } | null;
	expect(e, `the database accepted a row ${constraint} should refuse`).not.toBeNull();
	expect(e?.original?.errno).toBe(4025);
	expect(e?.original?.message).toContain(constraint);
};

beforeAll(async () => {
	f = await createReviewProtocol({ discrepancies: [] });
	reviewer = await userId(ACCOUNTS.reviewer);
});

afterAll(async () => {
	await cleanupFixtures();
});

describe('discrepancies.kind', () => {
	it('takes every kind of the contract', async () => {
		for (const kind of CONTRACT_KINDS) {
			const { insertId } = await insert({ kind });
			expect((await selectOne<{ kind: string }>('SELECT kind FROM discrepancies WHERE id = :id', { id: insertId }))?.kind).toBe(kind);
		}
	});

	it('refuses a kind outside the list (a typo, another case, a trailing space, the empty string)', async () => {
		for (const kind of ['sign-flip', 'transposed', 'Mismatch', 'mismatch ', '']) await refusedBy(insert({ kind }), 'discrepancies_kind');
		await refusedBy(exec("UPDATE discrepancies SET kind = 'wrong_group' WHERE protocol_id = :p", { p: f.protocolId }), 'discrepancies_kind');
	});
});

describe('a decision is all four columns or none', () => {
	const whole = () => ({ resolution: 'first', resolved_value: '1.07', resolved_at: new Date(), resolved_by: reviewer });

	it('takes an open row and a whole decision, and clearing a whole decision', async () => {
		const open = await insert({});
		const decided = await insert(whole());
		expect(open.insertId).toBeGreaterThan(0);
		expect(decided.insertId).toBeGreaterThan(0);
		const cleared = await exec('UPDATE discrepancies SET resolution = NULL, resolved_value = NULL, resolved_at = NULL, resolved_by = NULL WHERE id = :id', {
			id: decided.insertId
		});
		expect(cleared.affected).toBe(1);
	});

	it('refuses each partial set on insert', async () => {
		const all = whole();
		// every non-empty proper subset of the four columns
		const keys = Object.keys(all) as (keyof typeof all)[];
		for (let mask = 1; mask < 15; mask++) {
			const part = Object.fromEntries(keys.filter((_, i) => mask & (1 << i)).map((k) => [k, all[k]]));
			await refusedBy(insert(part), 'discrepancies_decision');
		}
	});

	it('refuses an update that leaves a part of a decision', async () => {
		const { insertId: id } = await insert({});
		// resolved without a value, a resolver or a choice (what a shortcut once wrote)
		await refusedBy(exec('UPDATE discrepancies SET resolved_at = CURRENT_TIMESTAMP(3) WHERE id = :id', { id }), 'discrepancies_decision');
		await refusedBy(
			exec("UPDATE discrepancies SET resolution = 'recomputed', resolved_at = CURRENT_TIMESTAMP(3) WHERE id = :id", { id }),
			'discrepancies_decision'
		);
		const { insertId: decided } = await insert(whole());
		// reopening must clear all four
		await refusedBy(exec('UPDATE discrepancies SET resolved_at = NULL WHERE id = :id', { id: decided }), 'discrepancies_decision');
		await refusedBy(exec('UPDATE discrepancies SET resolved_value = NULL WHERE id = :id', { id: decided }), 'discrepancies_decision');
	});
});

import { QueryTypes } from 'sequelize';
import type { Migration } from '../migrate-types';

/**
 * Two rules the code kept and the database did not (issue 16):
 * - `discrepancies.kind` is one of the kinds of src/lib/scoring/kinds.ts (`KINDS`, the contract's
 *   order), written out here because an applied migration must not change when that list does: a
 *   new kind is a new migration that replaces this CHECK.
 * - a decision is whole: `resolution`, `resolved_value`, `resolved_at` and `resolved_by` are all set
 *   (a reviewer's choice, or a derived row settled by a raw decision or an amendment: 'recomputed'
 *   with the reference as its value and the raw decision's resolver) or all empty (open; a reopened
 *   round's rows; a row judged again). No code path writes a part of one (checked before this
 *   migration: resolveDiscrepancy, rejudgeDerived, reopen, amendments' apply).
 * Rows that break either rule stop the migration with their ids, so nothing is guessed.
 */
const KINDS = [
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

// CAST … AS BINARY: byte for byte (the column's collation would take 'Mismatch' and 'mismatch ')
const ALL_SET = 'resolution IS NOT NULL AND resolved_value IS NOT NULL AND resolved_at IS NOT NULL AND resolved_by IS NOT NULL';
const NONE_SET = 'resolution IS NULL AND resolved_value IS NULL AND resolved_at IS NULL AND resolved_by IS NULL';

export const up: Migration = async ({ context: q }) => {
	const kinds = KINDS.map((k) => q.sequelize.escape(k)).join(', ');
	const bad = await q.sequelize.query<{ id: number }>(
		`SELECT id FROM discrepancies WHERE CAST(kind AS BINARY) NOT IN (${kinds}) OR NOT ((${ALL_SET}) OR (${NONE_SET})) ORDER BY id LIMIT 20`,
		{ type: QueryTypes.SELECT }
	);
	if (bad.length)
		throw new Error(
			`00024: discrepancies ${bad.map((r) => r.id).join(', ')} have an unknown kind or a partial decision; correct them (or clear the decision) before migrating.`
		);
	await q.sequelize.query(`ALTER TABLE discrepancies ADD CONSTRAINT discrepancies_kind CHECK (CAST(kind AS BINARY) IN (${kinds}))`);
	await q.sequelize.query(`ALTER TABLE discrepancies ADD CONSTRAINT discrepancies_decision CHECK ((${ALL_SET}) OR (${NONE_SET}))`);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('ALTER TABLE discrepancies DROP CONSTRAINT discrepancies_decision');
	await q.sequelize.query('ALTER TABLE discrepancies DROP CONSTRAINT discrepancies_kind');
};

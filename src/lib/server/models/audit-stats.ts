/**
 * Models of the audit statistics' row-level tables (db/migrations/00003-protocols.ts, 00006-audit.ts,
 * 00014-norm-forms.ts, 00023-review-evidence.ts): what each submitted round and each resolution
 * contributed, written and replaced by src/lib/server/audit-stats/record.ts.
 *
 * The daily summaries (audit_daily, agreement_daily, agreement_weekly, agreement_pair_daily and their
 * `_delta` tables, 00026) have no model: they are only ever written and read by aggregate SQL
 * (INSERT … SELECT … GROUP BY, SUM over ranges), which is where raw SQL earns its place.
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes, type Sequelize } from 'sequelize';
import { FIELDS, type Field } from '../../scoring/scales';

/** The field column's values: the score fields and a composite's `sum` (00014). */
export const STAT_FIELDS = [...FIELDS, 'sum'] as const;
export type StatField = Field | 'sum';

/** Fields a scorer entered in one submitted pass on one test (test_code '' = the whole pass). */
export class AuditField extends Model<InferAttributes<AuditField>, InferCreationAttributes<AuditField>> {
	declare pass_id: number;
	/** '' for the whole pass (its fields_entered is passes.fields_entered, the overall denominator). */
	declare test_code: string;
	declare protocol_id: number;
	declare round: number;
	declare which: 'first' | 'second';
	declare scorer_id: number;
	declare battery_id: number;
	/** The test's domain code ('' on the whole-pass row, 'unknown' when the test has none). */
	declare domain: string;
	declare fields_entered: number;
	declare raw_fields: number;
	declare derived_fields: number;
	declare entered_at: Date;
}

/** Both passes' entries of one field of one test in one protocol round, as numbers and AACN bands. */
export class AgreementPair extends Model<InferAttributes<AgreementPair>, InferCreationAttributes<AgreementPair>> {
	declare id: CreationOptional<number>;
	declare protocol_id: number;
	declare round: number;
	declare battery_id: number;
	declare test_code: string;
	declare domain: string;
	declare field: Field;
	declare first_scorer_id: number;
	declare second_scorer_id: number;
	/** null: not entered, or not a number. */
	declare first_value: number | null;
	declare second_value: number | null;
	/** AACN 2020 band id of the value (labelled fields only). */
	declare first_label: string | null;
	declare second_label: string | null;
	declare entered_at: Date;
}

/** One error charged to one scorer by a resolved discrepancy. */
export class ErrorEvent extends Model<InferAttributes<ErrorEvent>, InferCreationAttributes<ErrorEvent>> {
	declare id: CreationOptional<number>;
	declare discrepancy_id: number;
	declare protocol_id: number;
	declare scorer_id: number;
	declare battery_id: number;
	declare test_code: string;
	declare domain: string;
	declare field: StatField;
	declare kind: string;
	/** When the charged pass was submitted (the week the error belongs to). */
	declare entered_at: Date;
	/** 1: the kept value contradicts the recomputation (the charge rests on the reviewer's note). */
	declare judgement: CreationOptional<0 | 1>;
}

const uint = (extra: object = {}) => ({ type: DataTypes.INTEGER.UNSIGNED, allowNull: false, ...extra });
const code = (max = 40) => ({ type: DataTypes.STRING(max), allowNull: false, validate: { len: [0, max] as [number, number] } });
// functions, not shared objects: Sequelize writes each attribute's own name into its definition
const fieldEnum = () => ({ type: DataTypes.ENUM(...STAT_FIELDS), allowNull: false, validate: { isIn: [[...STAT_FIELDS] as string[]] } });
const double = () => ({ type: DataTypes.DOUBLE, allowNull: true });
const label = () => ({ type: DataTypes.STRING(30), allowNull: true });

/** Bind the models to a connection (called from models() in ./index.ts). */
export function initAuditStatsModels(sequelize: Sequelize): void {
	AuditField.init(
		{
			pass_id: uint({ primaryKey: true }),
			test_code: { ...code(), primaryKey: true },
			protocol_id: uint(),
			round: uint(),
			which: { type: DataTypes.ENUM('first', 'second'), allowNull: false },
			scorer_id: uint(),
			battery_id: uint(),
			domain: code(),
			fields_entered: uint(),
			raw_fields: uint(),
			derived_fields: uint(),
			entered_at: { type: DataTypes.DATE(3), allowNull: false }
		},
		{ sequelize, tableName: 'audit_fields', timestamps: false }
	);
	AgreementPair.init(
		{
			id: uint({ autoIncrement: true, primaryKey: true }),
			protocol_id: uint(),
			round: uint(),
			battery_id: uint(),
			test_code: code(),
			domain: code(),
			field: fieldEnum(),
			first_scorer_id: uint(),
			second_scorer_id: uint(),
			first_value: double(),
			second_value: double(),
			first_label: label(),
			second_label: label(),
			entered_at: { type: DataTypes.DATE(3), allowNull: false }
		},
		{ sequelize, tableName: 'agreement_pairs', timestamps: false }
	);
	ErrorEvent.init(
		{
			id: { type: DataTypes.BIGINT.UNSIGNED, autoIncrement: true, primaryKey: true },
			discrepancy_id: uint(),
			protocol_id: uint(),
			scorer_id: uint(),
			battery_id: uint(),
			test_code: code(),
			domain: code(),
			field: fieldEnum(),
			kind: code(30),
			entered_at: { type: DataTypes.DATE(3), allowNull: false },
			judgement: { type: DataTypes.TINYINT, allowNull: false, defaultValue: 0, validate: { isIn: [[0, 1]] } }
		},
		{ sequelize, tableName: 'error_events', timestamps: false }
	);
}

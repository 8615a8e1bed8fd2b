/**
 * Models of the audit statistics' row-level tables (db/migrations/00003-protocols.ts, 00006-audit.ts,
 * 00014-norm-forms.ts, 00023-review-evidence.ts): what each submitted round and each resolution
 * contributed, written and replaced by src/lib/server/audit-stats/record.ts.
 *
 * And of the daily summaries (00006: audit_daily, agreement_daily, agreement_weekly,
 * agreement_pair_daily) and their append-only `_delta` tables (00026), kept by record.ts; and of
 * the whole-range summaries (00031: agreement_total, agreement_pair_total, agreement_values and
 * agreement_values_delta). Those are
 * added to and read by aggregate SQL (INSERT … SELECT … GROUP BY, SUM over ranges: raw SQL where it
 * earns its place); the models serve the row-by-row work (the fold's locking read and delete by id,
 * tests) and give the columns one typed definition.
 */
import {
	DataTypes,
	Model,
	type CreationOptional,
	type InferAttributes,
	type InferCreationAttributes,
	type ModelAttributes,
	type ModelStatic,
	type Optional,
	type Sequelize
} from 'sequelize';
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
	/** The test's domain code ('' on the whole-pass row, `COMPOSITE_DOMAIN` of record.ts for a composite). */
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

/*
 * The daily summaries and their delta twins share their columns (a delta row has its own id and no
 * key of its own): the attributes are written once as types, and each class only names them. No
 * service reads these rows' attributes one by one (the aggregates are SQL), so the classes declare
 * no instance fields.
 */
/** Fields entered per day × scorer × battery × test ('' = the whole pass, 00006). `day`: YYYY-MM-DD. */
type AuditDailyRow = { day: string; scorer_id: number; battery_id: number; test_code: string; domain: string } & Counts<
	'passes' | 'fields_entered' | 'raw_fields' | 'derived_fields'
>;
/** The sums kept per agreement cell: pair counts and the moments of the two values. */
type AgreementMeasures = Counts<'pairs' | 'one_sided' | 'exact' | 'sx' | 'sy' | 'sxx' | 'syy' | 'sxy' | 'sd' | 'sdd'>;
/** AACN band ids ('' = no band: raw scores, or not a number). */
type BandPair = { first_label: string; second_label: string };
/** Agreement per scorer (0 = every pair once) × day × battery × test × field × band pair. */
type AgreementDailyRow = { scorer_id: number; day: string; battery_id: number; test_code: string; field: Field } & BandPair & AgreementMeasures;
/** agreement_daily by ISO week (`week` is its Monday). */
type AgreementWeeklyRow = Omit<AgreementDailyRow, 'day'> & { week: string };
/** Agreement per (first scorer, second scorer) pair × day, for the scorer-pair table. */
type AgreementPairDailyRow = {
	field: Field;
	day: string;
	first_scorer_id: number;
	second_scorer_id: number;
	battery_id: number;
	test_code: string;
} & BandPair &
	AgreementMeasures;
/** Measure columns: NOT NULL DEFAULT 0, so optional when a row is created. */
type Counts<K extends string> = { [k in K]: number };
type Measures<R> = Extract<keyof R, keyof AgreementMeasures | 'passes' | 'fields_entered' | 'raw_fields' | 'derived_fields'>;
/** A summary row as created (the measures default to 0), and its delta twin (own id, from the sequence). */
type Created<R> = Optional<R, Measures<R>>;
type Delta<R> = R & { id: number };

export class AuditDaily extends Model<AuditDailyRow, Created<AuditDailyRow>> {}
/** Not yet folded into audit_daily: one round's sums (negated when it was recorded again; 00026). */
export class AuditDailyDelta extends Model<Delta<AuditDailyRow>, Optional<Delta<AuditDailyRow>, 'id' | Measures<AuditDailyRow>>> {}
export class AgreementDaily extends Model<AgreementDailyRow, Created<AgreementDailyRow>> {}
export class AgreementDailyDelta extends Model<Delta<AgreementDailyRow>, Optional<Delta<AgreementDailyRow>, 'id' | Measures<AgreementDailyRow>>> {}
export class AgreementWeekly extends Model<AgreementWeeklyRow, Created<AgreementWeeklyRow>> {}
export class AgreementWeeklyDelta extends Model<Delta<AgreementWeeklyRow>, Optional<Delta<AgreementWeeklyRow>, 'id' | Measures<AgreementWeeklyRow>>> {}
export class AgreementPairDaily extends Model<AgreementPairDailyRow, Created<AgreementPairDailyRow>> {}
export class AgreementPairDailyDelta extends Model<
	Delta<AgreementPairDailyRow>,
	Optional<Delta<AgreementPairDailyRow>, 'id' | Measures<AgreementPairDailyRow>>
> {}

/** The Bland–Altman points pre-binned over the whole range (00031): scorer (0 = all) × field × battery × test × both values → pairs. */
type AgreementValuesRow = {
	scorer_id: number;
	field: Field;
	battery_id: number;
	test_code: string;
	first_value: number;
	second_value: number;
	pairs: number;
};
export class AgreementValues extends Model<AgreementValuesRow, Optional<AgreementValuesRow, 'pairs'>> {}
export class AgreementValuesDelta extends Model<Delta<AgreementValuesRow>, Optional<Delta<AgreementValuesRow>, 'id' | 'pairs'>> {}
/** agreement_weekly without the week (00031), added to by the fold of agreement_weekly_delta (sql.ts, TOTALS). */
export class AgreementTotal extends Model<Omit<AgreementWeeklyRow, 'week'>, Created<Omit<AgreementWeeklyRow, 'week'>>> {}
/** agreement_pair_daily without the day (00031), added to by the fold of agreement_pair_daily_delta. */
export class AgreementPairTotal extends Model<Omit<AgreementPairDailyRow, 'day'>, Created<Omit<AgreementPairDailyRow, 'day'>>> {}

/** Each summary's model and its delta table's model, by summary table name (sql.ts, SUMMARIES). */
export const SUMMARY_MODELS: Record<
	'audit_daily' | 'agreement_daily' | 'agreement_weekly' | 'agreement_pair_daily' | 'agreement_values',
	{ summary: ModelStatic<Model>; delta: ModelStatic<Model> }
> = {
	audit_daily: { summary: AuditDaily, delta: AuditDailyDelta },
	agreement_daily: { summary: AgreementDaily, delta: AgreementDailyDelta },
	agreement_weekly: { summary: AgreementWeekly, delta: AgreementWeeklyDelta },
	agreement_pair_daily: { summary: AgreementPairDaily, delta: AgreementPairDailyDelta },
	agreement_values: { summary: AgreementValues, delta: AgreementValuesDelta }
};

const uint = (extra: object = {}) => ({ type: DataTypes.INTEGER.UNSIGNED, allowNull: false, ...extra });
const code = (max = 40) => ({ type: DataTypes.STRING(max), allowNull: false, validate: { len: [0, max] as [number, number] } });
// functions, not shared objects: Sequelize writes each attribute's own name into its definition
const fieldEnum = () => ({ type: DataTypes.ENUM(...STAT_FIELDS), allowNull: false, validate: { isIn: [[...STAT_FIELDS] as string[]] } });
const double = () => ({ type: DataTypes.DOUBLE, allowNull: true });
const label = () => ({ type: DataTypes.STRING(30), allowNull: true });

// the summaries' columns (00006, 00026): measure columns are NOT NULL DEFAULT 0
const int = () => ({ type: DataTypes.INTEGER, allowNull: false, defaultValue: 0, validate: { isInt: true } });
const sum = () => ({ type: DataTypes.DOUBLE, allowNull: false, defaultValue: 0 });
const day = (primaryKey = false) => ({ type: DataTypes.DATEONLY, allowNull: false, primaryKey, validate: { isDate: true } });
const key = <T extends object>(a: T) => ({ ...a, primaryKey: true });
const agreementMeasures = () => ({
	pairs: int(),
	one_sided: int(),
	exact: int(),
	sx: sum(),
	sy: sum(),
	sxx: sum(),
	syy: sum(),
	sxy: sum(),
	sd: sum(),
	sdd: sum()
});
// the six score fields (no composite `sum` in the agreement tables, 00006)
const scoreField = () => ({ type: DataTypes.ENUM(...FIELDS), allowNull: false, validate: { isIn: [[...FIELDS] as string[]] } });
const deltaId = () => ({ type: DataTypes.BIGINT.UNSIGNED, autoIncrement: true, primaryKey: true });
/** A summary's columns with its key as the primary key, or its delta table's (own id as the only key). */
function summaryColumns(columns: Record<string, object>, keys: readonly string[], delta: boolean): ModelAttributes {
	const out: Record<string, object> = delta ? { id: deltaId() } : {};
	for (const [name, def] of Object.entries(columns)) out[name] = !delta && keys.includes(name) ? key(def) : def;
	return out as ModelAttributes;
}

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
	const auditDaily = {
		day: day(),
		scorer_id: uint(),
		battery_id: uint(),
		test_code: code(),
		domain: code(),
		passes: int(),
		fields_entered: int(),
		raw_fields: int(),
		derived_fields: int()
	};
	const agreement = (bucket: 'day' | 'week') => ({
		scorer_id: uint(),
		[bucket]: day(),
		battery_id: uint(),
		test_code: code(),
		field: scoreField(),
		first_label: code(30),
		second_label: code(30),
		...agreementMeasures()
	});
	const pairDaily = {
		field: scoreField(),
		day: day(),
		first_scorer_id: uint(),
		second_scorer_id: uint(),
		battery_id: uint(),
		test_code: code(),
		first_label: code(30),
		second_label: code(30),
		...agreementMeasures()
	};
	const tables: Array<[ModelStatic<Model>, string, Record<string, object>, readonly string[]]> = [
		[AuditDaily, 'audit_daily', auditDaily, ['day', 'scorer_id', 'battery_id', 'test_code']],
		[AgreementDaily, 'agreement_daily', agreement('day'), ['scorer_id', 'day', 'battery_id', 'test_code', 'field', 'first_label', 'second_label']],
		[AgreementWeekly, 'agreement_weekly', agreement('week'), ['scorer_id', 'week', 'battery_id', 'test_code', 'field', 'first_label', 'second_label']],
		[
			AgreementPairDaily,
			'agreement_pair_daily',
			pairDaily,
			['field', 'day', 'first_scorer_id', 'second_scorer_id', 'battery_id', 'test_code', 'first_label', 'second_label']
		]
	];
	const values = {
		scorer_id: uint(),
		field: scoreField(),
		battery_id: uint(),
		test_code: code(),
		first_value: { type: DataTypes.DOUBLE, allowNull: false },
		second_value: { type: DataTypes.DOUBLE, allowNull: false },
		pairs: int()
	};
	tables.push([AgreementValues, 'agreement_values', values, ['scorer_id', 'field', 'battery_id', 'test_code', 'first_value', 'second_value']]);
	const deltas: Record<string, ModelStatic<Model>> = {
		audit_daily: AuditDailyDelta,
		agreement_daily: AgreementDailyDelta,
		agreement_weekly: AgreementWeeklyDelta,
		agreement_pair_daily: AgreementPairDailyDelta,
		agreement_values: AgreementValuesDelta
	};
	for (const [model, tableName, columns, keys] of tables) {
		// fresh column definitions per model: Sequelize writes each attribute's name into its own
		const copy = () => Object.fromEntries(Object.entries(columns).map(([n, d]) => [n, { ...d }]));
		model.init(summaryColumns(copy(), keys, false), { sequelize, tableName, timestamps: false });
		deltas[tableName].init(summaryColumns(copy(), keys, true), { sequelize, tableName: `${tableName}_delta`, timestamps: false });
	}
	// the whole-range totals (00031): the weekly / daily columns without the date, no delta twin
	const withoutDate = (columns: Record<string, object>, date: string) =>
		Object.fromEntries(
			Object.entries(columns)
				.filter(([n]) => n !== date)
				.map(([n, d]) => [n, { ...d }])
		);
	AgreementTotal.init(
		summaryColumns(withoutDate(agreement('week'), 'week'), ['scorer_id', 'battery_id', 'test_code', 'field', 'first_label', 'second_label'], false),
		{
			sequelize,
			tableName: 'agreement_total',
			timestamps: false
		}
	);
	AgreementPairTotal.init(
		summaryColumns(
			withoutDate(pairDaily, 'day'),
			['field', 'first_scorer_id', 'second_scorer_id', 'battery_id', 'test_code', 'first_label', 'second_label'],
			false
		),
		{ sequelize, tableName: 'agreement_pair_total', timestamps: false }
	);
}

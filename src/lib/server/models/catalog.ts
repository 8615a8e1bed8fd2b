/**
 * Models of the catalog tables (db/migrations/00002-catalog.ts, 00014-norm-forms.ts): domains, tests
 * (versioned: `code` + `version`, one `is_current` per code), norm sets and their groups, batteries
 * and their ordered tests. Validations mirror the database's constraints (lengths, unsigned, enums,
 * JSON checks); the unique keys are declared as the schema has them. None of these tables has an
 * optimistic lock column. Bound by `models()` in ./index.ts, which also wires the associations the
 * services walk: norm set → groups → table rows, battery → battery_tests → tests, battery →
 * composites, domain → tests.
 */
import {
	DataTypes,
	Model,
	type CreationOptional,
	type InferAttributes,
	type InferCreationAttributes,
	type ModelAttributeColumnOptions,
	type NonAttribute,
	type Sequelize
} from 'sequelize';
import type { NormTableRow, Composite } from './index';
import { jsonColumn, stampedAt } from './columns';

/** A DECIMAL column read as a JS number (null stays null). */
export function decimalColumn(name: string, precision: number, scale: number, allowNull = false): ModelAttributeColumnOptions {
	return {
		type: DataTypes.DECIMAL(precision, scale),
		allowNull,
		get(this: Model) {
			const v = this.getDataValue(name as never) as unknown;
			return v === null || v === undefined ? null : Number(v);
		}
	};
}

// a fresh object each time: Sequelize writes into an attribute's definition (its `field`)
const code40 = () => ({ type: DataTypes.STRING(40), allowNull: false, validate: { len: [1, 40] as [number, number] } });
const unsigned = (allowNull = false) => ({ type: DataTypes.INTEGER.UNSIGNED, allowNull, validate: { min: 0 } });

export class Domain extends Model<InferAttributes<Domain>, InferCreationAttributes<Domain>> {
	declare code: string;
	declare name: string;
	declare position: CreationOptional<number>;
	declare tests?: NonAttribute<Test[]>;
}

export class Test extends Model<InferAttributes<Test>, InferCreationAttributes<Test>> {
	declare id: CreationOptional<number>;
	declare code: string;
	declare version: CreationOptional<number>;
	declare is_current: CreationOptional<boolean>;
	declare name: string;
	declare domain: string;
	declare unit: CreationOptional<string>;
	declare direction: 'higher_better' | 'lower_better';
	declare raw_min: number;
	declare raw_max: number;
	declare raw_decimals: CreationOptional<number>;
	/** Comma-separated derived scores (z, standard, scaled, t, percentile). */
	declare reported: string;
	declare bounds: Partial<Record<string, [number, number]>> | null;
	declare reliability: number | null;
	declare notes: string | null;
	declare created_at: CreationOptional<Date>;
	declare domainInfo?: NonAttribute<Domain>;
}

export class NormSet extends Model<InferAttributes<NormSet>, InferCreationAttributes<NormSet>> {
	declare id: CreationOptional<number>;
	declare code: string;
	declare name: string;
	declare source: string;
	declare version: CreationOptional<string>;
	declare age_rule: { borrowDays?: 30 | 'actual'; rounding?: 'truncate' | 'round_days'; roundUpFromDay?: number };
	declare covariate_age: CreationOptional<'whole_years' | 'decimal_years'>;
	declare created_at: CreationOptional<Date>;
	declare groups?: NonAttribute<NormGroup[]>;
}

export class NormGroup extends Model<InferAttributes<NormGroup>, InferCreationAttributes<NormGroup>> {
	declare id: CreationOptional<number>;
	declare norm_set_id: number;
	declare subject: CreationOptional<'test' | 'composite'>;
	/** The test's code, or the composite's (subject = 'composite'). */
	declare test_code: string;
	declare group_code: string;
	declare age_min_months: number;
	declare age_max_months: number;
	declare sex: 'F' | 'M' | null;
	declare edu_min: number | null;
	declare edu_max: number | null;
	declare form: CreationOptional<'mean_sd' | 'table' | 'regression'>;
	declare scale: 'scaled' | 'standard' | 't' | 'percentile' | null;
	declare intercept: number | null;
	declare coefficients: { age?: number; education?: number; sex?: number } | null;
	declare mean: number | null;
	declare sd: number | null;
	declare n: number | null;
	declare tableRows?: NonAttribute<NormTableRow[]>;
}

export class Battery extends Model<InferAttributes<Battery>, InferCreationAttributes<Battery>> {
	declare id: CreationOptional<number>;
	declare code: string;
	declare name: string;
	declare description: string | null;
	declare norm_set_id: number | null;
	declare created_at: CreationOptional<Date>;
	declare normSet?: NonAttribute<NormSet | null>;
	declare items?: NonAttribute<BatteryTest[]>;
	declare composites?: NonAttribute<Composite[]>;
}

/** A test of a battery, by code (the current version is the one a new protocol freezes), in order. */
export class BatteryTest extends Model<InferAttributes<BatteryTest>, InferCreationAttributes<BatteryTest>> {
	declare battery_id: number;
	declare test_code: string;
	declare position: number;
	declare test?: NonAttribute<Test>;
}

export const catalogModels = { Domain, Test, NormSet, NormGroup, Battery, BatteryTest };

export function initCatalogModels(sequelize: Sequelize, other: { NormTableRow: typeof NormTableRow; Composite: typeof Composite }): void {
	Domain.init(
		{
			code: { ...code40(), primaryKey: true },
			name: { type: DataTypes.STRING(80), allowNull: false, validate: { len: [1, 80] } },
			position: { type: DataTypes.INTEGER, allowNull: false, defaultValue: 0 }
		},
		{ sequelize, tableName: 'domains', timestamps: false }
	);
	Test.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			code: { ...code40(), unique: 'tests_code_version' },
			version: { ...unsigned(), defaultValue: 1, unique: 'tests_code_version' },
			is_current: { type: DataTypes.BOOLEAN, allowNull: false, defaultValue: true },
			name: { type: DataTypes.STRING(120), allowNull: false, validate: { len: [1, 120] } },
			domain: code40(),
			unit: { type: DataTypes.STRING(40), allowNull: false, defaultValue: 'points', validate: { len: [1, 40] } },
			direction: { type: DataTypes.ENUM('higher_better', 'lower_better'), allowNull: false },
			raw_min: decimalColumn('raw_min', 12, 4),
			raw_max: decimalColumn('raw_max', 12, 4),
			raw_decimals: { type: DataTypes.TINYINT.UNSIGNED, allowNull: false, defaultValue: 0, validate: { min: 0, max: 255 } },
			reported: { type: DataTypes.STRING(80), allowNull: false, validate: { len: [1, 80] } },
			bounds: jsonColumn('bounds', true),
			reliability: decimalColumn('reliability', 5, 4, true),
			notes: { type: DataTypes.TEXT, allowNull: true },
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'tests', timestamps: false }
	);
	NormSet.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			code: { ...code40(), unique: 'norm_sets_code_version' },
			name: { type: DataTypes.STRING(160), allowNull: false, validate: { len: [1, 160] } },
			source: { type: DataTypes.TEXT, allowNull: false },
			version: { type: DataTypes.STRING(40), allowNull: false, defaultValue: '1', unique: 'norm_sets_code_version', validate: { len: [1, 40] } },
			age_rule: jsonColumn('age_rule'),
			covariate_age: { type: DataTypes.ENUM('whole_years', 'decimal_years'), allowNull: false, defaultValue: 'whole_years' },
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'norm_sets', timestamps: false }
	);
	NormGroup.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			norm_set_id: { ...unsigned(), unique: 'norm_groups_key' },
			subject: { type: DataTypes.ENUM('test', 'composite'), allowNull: false, defaultValue: 'test' },
			test_code: { ...code40(), unique: 'norm_groups_key' },
			group_code: { ...code40(), unique: 'norm_groups_key' },
			age_min_months: unsigned(),
			age_max_months: unsigned(),
			sex: { type: DataTypes.ENUM('F', 'M'), allowNull: true },
			edu_min: { type: DataTypes.TINYINT.UNSIGNED, allowNull: true, validate: { min: 0, max: 255 } },
			edu_max: { type: DataTypes.TINYINT.UNSIGNED, allowNull: true, validate: { min: 0, max: 255 } },
			form: { type: DataTypes.ENUM('mean_sd', 'table', 'regression'), allowNull: false, defaultValue: 'mean_sd' },
			scale: { type: DataTypes.ENUM('scaled', 'standard', 't', 'percentile'), allowNull: true },
			intercept: decimalColumn('intercept', 16, 6, true),
			coefficients: jsonColumn('coefficients', true),
			mean: decimalColumn('mean', 12, 4, true),
			sd: decimalColumn('sd', 12, 4, true),
			n: unsigned(true)
		},
		{ sequelize, tableName: 'norm_groups', timestamps: false }
	);
	Battery.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			code: { ...code40(), unique: 'batteries_code' },
			name: { type: DataTypes.STRING(160), allowNull: false, validate: { len: [1, 160] } },
			description: { type: DataTypes.TEXT, allowNull: true },
			norm_set_id: unsigned(true),
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'batteries', timestamps: false }
	);
	BatteryTest.init(
		{
			battery_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
			test_code: { ...code40(), primaryKey: true },
			position: unsigned()
		},
		{ sequelize, tableName: 'battery_tests', timestamps: false }
	);

	const { NormTableRow, Composite } = other;
	Domain.hasMany(Test, { foreignKey: 'domain', sourceKey: 'code', as: 'tests' });
	Test.belongsTo(Domain, { foreignKey: 'domain', targetKey: 'code', as: 'domainInfo' });
	NormSet.hasMany(NormGroup, { foreignKey: 'norm_set_id', as: 'groups' });
	NormGroup.belongsTo(NormSet, { foreignKey: 'norm_set_id', as: 'normSet' });
	NormGroup.hasMany(NormTableRow, { foreignKey: 'norm_group_id', as: 'tableRows' });
	Battery.belongsTo(NormSet, { foreignKey: 'norm_set_id', as: 'normSet' });
	Battery.hasMany(BatteryTest, { foreignKey: 'battery_id', as: 'items' });
	Battery.hasMany(Composite, { foreignKey: 'battery_id', as: 'composites' });
	// battery_tests name a test by code (every version shares it): join with `is_current` in the include
	BatteryTest.belongsTo(Test, { foreignKey: 'test_code', targetKey: 'code', as: 'test', constraints: false });
}

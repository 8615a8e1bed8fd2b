/**
 * Sequelize models of the tables born with issue 14 (norm tables, composites, a protocol's frozen
 * composites); the catalog's (./catalog.ts) and the accounts' and settings' (./people.ts) are bound
 * here too. `models()` initialises them once against the shared connection (lazy, so importing is free).
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes, type NonAttribute } from 'sequelize';
import { db } from '../db';
import { jsonColumn, stampedAt } from './columns';
import { initAuditStatsModels } from './audit-stats';
import { amendments } from './amendment';
import { initProtocolModels, PROTOCOL_MODELS } from './protocol';
import { catalogModels, initCatalogModels, type NormGroup } from './catalog';
import { peopleModels, initPeopleModels } from './people';
import { initMailModels, Outbox, MailLog } from './mail';

/** One row of a conversion table: a raw (or sum) range and what the manual gives for it. */
export class NormTableRow extends Model<InferAttributes<NormTableRow>, InferCreationAttributes<NormTableRow>> {
	declare id: CreationOptional<number>;
	declare norm_group_id: number;
	declare position: number;
	declare lo: number;
	declare hi: number;
	declare score: number | null;
	/** A whole number 1–99, "<1", ">99", or a band ("5-9", "<=2", ">=25") as the manual prints it. */
	declare percentile: string | null;
}

/** A battery's composite (index) score: the sum of its parts' scores on one scale. */
export class Composite extends Model<InferAttributes<Composite>, InferCreationAttributes<Composite>> {
	declare id: CreationOptional<number>;
	declare battery_id: number;
	declare code: string;
	declare name: string;
	declare position: number;
	declare part_field: 'scaled' | 'standard' | 't';
	declare parts: string[];
	/** Comma-separated, in field order: sum, z, standard, scaled, t, percentile. */
	declare reported: string;
	declare reliability: number | null;
	declare created_at: CreationOptional<Date>;
}

/** What a protocol froze of a composite at creation: its definition and its norm group. */
export interface FrozenComposite {
	code: string;
	name: string;
	parts: string[];
	part_field: 'scaled' | 'standard' | 't';
	reported: string[];
	reliability: number | null;
}

export class ProtocolComposite extends Model<InferAttributes<ProtocolComposite>, InferCreationAttributes<ProtocolComposite>> {
	declare protocol_id: number;
	declare position: number;
	declare code: string;
	declare definition: FrozenComposite;
	declare norm_group_id: number | null;
	declare normGroup?: NonAttribute<NormGroup | null>;
}

/** The connection the models were last initialised on (closeDb() makes a new one). */
let bound: ReturnType<typeof db> | null = null;

export function models() {
	const sequelize = db();
	if (bound !== sequelize) {
		const decimal = (name: string) => ({
			type: DataTypes.DECIMAL(12, 4),
			allowNull: false,
			get(this: Model) {
				return Number(this.getDataValue(name as never));
			}
		});
		NormTableRow.init(
			{
				id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
				norm_group_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				position: { type: DataTypes.SMALLINT.UNSIGNED, allowNull: false },
				lo: decimal('lo'),
				hi: decimal('hi'),
				score: { type: DataTypes.SMALLINT, allowNull: true },
				percentile: { type: DataTypes.STRING(12), allowNull: true }
			},
			{ sequelize, tableName: 'norm_table_rows', timestamps: false }
		);
		Composite.init(
			{
				id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
				battery_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				code: { type: DataTypes.STRING(40), allowNull: false },
				name: { type: DataTypes.STRING(120), allowNull: false },
				position: { type: DataTypes.SMALLINT.UNSIGNED, allowNull: false },
				part_field: { type: DataTypes.ENUM('scaled', 'standard', 't'), allowNull: false },
				parts: jsonColumn('parts'),
				reported: { type: DataTypes.STRING(80), allowNull: false },
				reliability: {
					type: DataTypes.DECIMAL(5, 4),
					allowNull: true,
					get(this: Model) {
						const v = this.getDataValue('reliability' as never) as unknown;
						return v === null || v === undefined ? null : Number(v);
					}
				},
				created_at: stampedAt()
			},
			{ sequelize, tableName: 'composites', timestamps: false }
		);
		ProtocolComposite.init(
			{
				protocol_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
				position: { type: DataTypes.SMALLINT.UNSIGNED, primaryKey: true },
				code: { type: DataTypes.STRING(40), allowNull: false },
				definition: jsonColumn('definition'),
				norm_group_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true }
			},
			{ sequelize, tableName: 'protocol_composites', timestamps: false }
		);
		initAuditStatsModels(sequelize);
		initProtocolModels(sequelize, { ProtocolComposite, Amendment: amendments() });
		initCatalogModels(sequelize, { NormTableRow, Composite });
		// a protocol's frozen plan → the catalog rows it names (test version, norm group), read in one statement
		const { ProtocolTest } = PROTOCOL_MODELS;
		ProtocolTest.belongsTo(catalogModels.Test, { foreignKey: 'test_id', as: 'test', constraints: false });
		ProtocolTest.belongsTo(catalogModels.NormGroup, { foreignKey: 'norm_group_id', as: 'normGroup', constraints: false });
		ProtocolComposite.belongsTo(catalogModels.NormGroup, { foreignKey: 'norm_group_id', as: 'normGroup', constraints: false });
		initPeopleModels(sequelize);
		initMailModels(sequelize);
		bound = sequelize;
	}
	return { NormTableRow, Composite, ProtocolComposite, ...PROTOCOL_MODELS, ...catalogModels, ...peopleModels, Outbox, MailLog };
}

/**
 * The trail of every change (table audit_events, migration 00001): append-only — the app's
 * database user has only SELECT and INSERT on it (scripts/migrate.ts), so the model is only ever
 * created and counted, never saved over or destroyed.
 */
import { DataTypes, Model, literal, type CreationOptional, type InferAttributes, type InferCreationAttributes } from 'sequelize';
import { db } from '../db';

export class TrailRow extends Model<InferAttributes<TrailRow>, InferCreationAttributes<TrailRow>> {
	declare id: CreationOptional<number>;
	/** Set by the database (CURRENT_TIMESTAMP(3)), so every row has the database's clock. */
	declare at: CreationOptional<Date>;
	declare actor_id: number | null;
	declare entity: string;
	declare entity_id: string;
	declare action: string;
	declare protocol_id: number | null;
	/** JSON text of the value before and after. */
	declare old_value: string | null;
	declare new_value: string | null;
	declare reason: string | null;
}

/** The connection the model was last bound to (closeDb() makes a new one). */
let bound: ReturnType<typeof db> | null = null;

export function trailRows(): typeof TrailRow {
	const sequelize = db();
	if (bound !== sequelize) {
		TrailRow.init(
			{
				id: { type: DataTypes.BIGINT.UNSIGNED, autoIncrement: true, primaryKey: true },
				at: { type: DataTypes.DATE(3), allowNull: false, defaultValue: literal('CURRENT_TIMESTAMP(3)') },
				actor_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				entity: { type: DataTypes.STRING(40), allowNull: false, validate: { len: [1, 40] } },
				entity_id: { type: DataTypes.STRING(64), allowNull: false, validate: { len: [1, 64] } },
				action: { type: DataTypes.STRING(40), allowNull: false, validate: { len: [1, 40] } },
				protocol_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				old_value: { type: DataTypes.TEXT('long'), allowNull: true },
				new_value: { type: DataTypes.TEXT('long'), allowNull: true },
				reason: { type: DataTypes.TEXT, allowNull: true }
			},
			{ sequelize, tableName: 'audit_events', timestamps: false }
		);
		bound = sequelize;
	}
	return TrailRow;
}

/**
 * An amendment of a verified protocol: one field corrected with a reason. A lead makes it (applied at
 * once) or a reviewer requests it and a lead approves (applied) or refuses it. Applying it opens a new
 * review round in which only that field and what depends on it are reviewed again.
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes } from 'sequelize';
import { db } from '../db';
import type { Field } from '../../scoring/scales';
import { stampedAt } from './columns';

export type AmendmentStatus = 'requested' | 'applied' | 'refused';

export class Amendment extends Model<InferAttributes<Amendment>, InferCreationAttributes<Amendment>> {
	declare id: CreationOptional<number>;
	declare protocol_id: number;
	/** The verified round the amendment corrects. */
	declare from_round: number;
	/** The review round the amendment opened (once applied). */
	declare round: CreationOptional<number | null>;
	declare test_code: string;
	declare field: Field;
	/** The verified value before the amendment (null: the field was empty). */
	declare old_value: string | null;
	declare new_value: string;
	declare reason: string;
	declare status: AmendmentStatus;
	declare requested_by: number;
	declare requested_at: CreationOptional<Date>;
	declare decided_by: CreationOptional<number | null>;
	declare decided_at: CreationOptional<Date | null>;
	declare decision_note: CreationOptional<string | null>;
}

/** The connection the model was last bound to (closeDb() makes a new one). */
let bound: ReturnType<typeof db> | null = null;

/** The model, bound to the app's current connection. */
export function amendments(): typeof Amendment {
	if (bound !== db()) {
		Amendment.init(
			{
				id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
				protocol_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				from_round: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				round: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				test_code: { type: DataTypes.STRING(40), allowNull: false },
				field: { type: DataTypes.ENUM('raw', 'z', 'standard', 'scaled', 't', 'percentile'), allowNull: false },
				old_value: { type: DataTypes.STRING(40), allowNull: true },
				new_value: { type: DataTypes.STRING(40), allowNull: false },
				reason: { type: DataTypes.TEXT, allowNull: false },
				status: { type: DataTypes.ENUM('requested', 'applied', 'refused'), allowNull: false },
				requested_by: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				requested_at: stampedAt(),
				decided_by: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				decided_at: { type: DataTypes.DATE(3), allowNull: true },
				decision_note: { type: DataTypes.TEXT, allowNull: true }
			},
			{ sequelize: db(), tableName: 'amendments', timestamps: false }
		);
		bound = db();
	}
	return Amendment;
}

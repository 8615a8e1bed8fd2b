/**
 * Models of the risk-based verification tables (db/migrations/00019-verification.ts):
 * a battery's second-pass policy, a scorer's standing under it, and each protocol's draw.
 * Bound to the app's connection on first use (importing is free).
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes } from 'sequelize';
import { db } from '../db';
import { stampedAt } from './columns';

export class VerificationPolicy extends Model<InferAttributes<VerificationPolicy>, InferCreationAttributes<VerificationPolicy>> {
	declare battery_id: number;
	declare mode: 'every' | 'sampled';
	declare min_fields: number;
	declare window_days: number;
	/** Raw-score errors per 100 raw fields. */
	declare threshold_per100: number;
	/** 0 < p ≤ 1. */
	declare probability: number;
	declare updated_by: number | null;
	declare updated_at: CreationOptional<Date>;
}

export class VerificationScorer extends Model<InferAttributes<VerificationScorer>, InferCreationAttributes<VerificationScorer>> {
	declare scorer_id: number;
	declare battery_id: number;
	declare mode: 'full' | 'sampled';
	declare since: Date;
	/** When the scorer was last put back on full double entry (qualification counts only later work). */
	declare reverted_at: Date | null;
	declare reason: string | null;
}

export type DrawOutcome = 'policy_full' | 'scorer_full' | 'required' | 'drawn' | 'not_drawn';

export class VerificationProtocol extends Model<InferAttributes<VerificationProtocol>, InferCreationAttributes<VerificationProtocol>> {
	declare protocol_id: number;
	declare required_by: CreationOptional<number | null>;
	declare required_at: CreationOptional<Date | null>;
	declare required_reason: CreationOptional<string | null>;
	/** Set at the first pass's submission, never before. 'not_drawn' = single pass. */
	declare outcome: CreationOptional<DrawOutcome | null>;
	declare decided_at: CreationOptional<Date | null>;
	declare scorer_id: CreationOptional<number | null>;
	declare battery_id: CreationOptional<number | null>;
	declare probability: CreationOptional<number | null>;
	/** The uniform draw in 0…999,999 (second pass when below p × 1,000,000). */
	declare draw_value: CreationOptional<number | null>;
	/** Raw fields the first scorer entered in this protocol. */
	declare raw_fields: CreationOptional<number | null>;
	/** All fields the first scorer entered in this protocol. */
	declare fields_entered: CreationOptional<number | null>;
	/** When the second pass of a drawn protocol was reconciled (it then counts in the sample). */
	declare checked_at: CreationOptional<Date | null>;
	declare policy: CreationOptional<Record<string, unknown> | null>;
}

/** The connection the models were last initialised on (closeDb() makes a new one). */
let bound: ReturnType<typeof db> | null = null;

export function verificationModels() {
	const sequelize = db();
	if (bound !== sequelize) {
		VerificationPolicy.init(
			{
				battery_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
				mode: { type: DataTypes.ENUM('every', 'sampled'), allowNull: false },
				min_fields: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				window_days: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
				threshold_per100: {
					type: DataTypes.DECIMAL(6, 3),
					allowNull: false,
					get() {
						return Number(this.getDataValue('threshold_per100'));
					}
				},
				probability: {
					type: DataTypes.DECIMAL(5, 4),
					allowNull: false,
					get() {
						return Number(this.getDataValue('probability'));
					}
				},
				updated_by: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				updated_at: stampedAt()
			},
			{ sequelize, tableName: 'verification_policies', timestamps: false }
		);
		VerificationScorer.init(
			{
				scorer_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
				battery_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
				mode: { type: DataTypes.ENUM('full', 'sampled'), allowNull: false },
				since: { type: DataTypes.DATE(3), allowNull: false },
				reverted_at: { type: DataTypes.DATE(3), allowNull: true },
				reason: { type: DataTypes.STRING(300), allowNull: true }
			},
			{ sequelize, tableName: 'verification_scorers', timestamps: false }
		);
		VerificationProtocol.init(
			{
				protocol_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
				required_by: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				required_at: { type: DataTypes.DATE(3), allowNull: true },
				required_reason: { type: DataTypes.STRING(500), allowNull: true },
				outcome: { type: DataTypes.ENUM('policy_full', 'scorer_full', 'required', 'drawn', 'not_drawn'), allowNull: true },
				decided_at: { type: DataTypes.DATE(3), allowNull: true },
				scorer_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				battery_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				probability: {
					type: DataTypes.DECIMAL(5, 4),
					allowNull: true,
					get() {
						const v = this.getDataValue('probability');
						return v === null || v === undefined ? null : Number(v);
					}
				},
				draw_value: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				raw_fields: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				fields_entered: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
				checked_at: { type: DataTypes.DATE(3), allowNull: true },
				policy: {
					type: DataTypes.TEXT('long'),
					allowNull: true,
					get() {
						const v = this.getDataValue('policy') as unknown;
						return v === null || v === undefined ? null : typeof v === 'string' ? JSON.parse(v) : (v as Record<string, unknown>);
					},
					set(v: Record<string, unknown> | null) {
						this.setDataValue('policy', (v === null ? null : JSON.stringify(v)) as never);
					}
				}
			},
			{ sequelize, tableName: 'verification_protocols', timestamps: false }
		);
		bound = sequelize;
	}
	return { VerificationPolicy, VerificationScorer, VerificationProtocol };
}

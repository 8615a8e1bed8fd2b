/**
 * Sequelize models of the protocol side (migration 00003 and the columns added since: covariates in
 * 00014; alternative, settled_by, settled_by_id, carried_from in 00023; the kind list and the
 * all-or-nothing resolution in 00024): examinees, protocols, the protocol's frozen tests, the two
 * passes of each round, the discrepancies of each round, and the scanned record forms. Validations
 * mirror the database's constraints; protocols and discrepancies carry the optimistic lock
 * (`lock_version`, Sequelize's `version`: an instance's save() adds `AND lock_version = n` and moves it).
 * `initProtocolModels` is called from `models()` (./index.ts); the services import the classes and the
 * attribute types from here.
 */
import {
	DataTypes,
	Model,
	OptimisticLockError,
	fn,
	type CreationOptional,
	type InferAttributes,
	type InferCreationAttributes,
	type ModelStatic,
	type NonAttribute,
	type Sequelize,
	type Transaction
} from 'sequelize';
import { readRetried } from '../db';
import type { Field } from '../../scoring/scales';
import { KINDS, type Kind } from '../../scoring/kinds';
import { jsonColumn, stampedAt } from './columns';
import type { NormGroup, Test } from './catalog';

export type Status = 'draft' | 'awaiting_second' | 'in_review' | 'verified';
export type Which = 'first' | 'second';
export type Resolution = 'first' | 'second' | 'recomputed' | 'other';
export type SettledBy = 'raw_decision' | 'amendment';

const FIELDS = ['raw', 'z', 'standard', 'scaled', 't', 'percentile', 'sum'] as const;

// factories, not shared objects: Model.init writes into each attribute's definition (its `field`)
const id = () => ({ type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true });
const ref = (allowNull = false) => ({ type: DataTypes.INTEGER.UNSIGNED, allowNull });
const text = (length: number, allowNull: boolean) => ({ type: DataTypes.STRING(length), allowNull, validate: { len: [0, length] as [number, number] } });

export class Examinee extends Model<InferAttributes<Examinee>, InferCreationAttributes<Examinee>> {
	declare id: CreationOptional<number>;
	declare code: string;
	declare name: string | null;
	/** YYYY-MM-DD */
	declare birth_date: string;
	declare sex: 'F' | 'M' | 'X' | null;
	declare education_years: number | null;
	declare created_by: number | null;
	declare created_at: CreationOptional<Date>;
}

export class Protocol extends Model<InferAttributes<Protocol>, InferCreationAttributes<Protocol>> {
	declare id: CreationOptional<number>;
	declare examinee_id: number;
	declare battery_id: number;
	declare norm_set_id: number;
	/** YYYY-MM-DD */
	declare test_date: string;
	declare age_text: string;
	declare age_months: number;
	/** The covariates regression norms used (age, education, sex), frozen at creation. */
	declare covariates: Record<string, number> | null;
	declare status: CreationOptional<Status>;
	declare round: CreationOptional<number>;
	declare first_scorer_id: number;
	declare second_scorer_id: number;
	declare reviewer_id: number;
	declare lock_version: CreationOptional<number>;
	declare status_changed_at: CreationOptional<Date>;
	declare verified_at: CreationOptional<Date | null>;
	declare verified_by: CreationOptional<number | null>;
	declare created_by: number | null;
	declare created_at: CreationOptional<Date>;
}

/** A protocol's test, frozen at creation: the test version and the norm group used. */
export class ProtocolTest extends Model<InferAttributes<ProtocolTest>, InferCreationAttributes<ProtocolTest>> {
	declare protocol_id: number;
	declare position: number;
	declare test_id: number;
	declare norm_group_id: number | null;
	declare override_reason: string | null;
	/** The frozen test version and the chosen norm group (associations bound in models/index.ts). */
	declare test?: NonAttribute<Test>;
	declare normGroup?: NonAttribute<NormGroup | null>;
}

export class Pass extends Model<InferAttributes<Pass>, InferCreationAttributes<Pass>> {
	declare id: CreationOptional<number>;
	declare protocol_id: number;
	declare round: number;
	declare which: Which;
	declare scorer_id: number;
	declare status: CreationOptional<'draft' | 'submitted'>;
	/** test code → field → value as typed (see protocols/passes.ts `Scores`). */
	declare scores: Record<string, Partial<Record<Field, string | null>>>;
	declare fields_entered: CreationOptional<number>;
	/** The draft's optimistic lock: compared with what the scorer's tab last saw. */
	declare draft_version: CreationOptional<number>;
	declare submitted_at: CreationOptional<Date | null>;
	declare updated_at: CreationOptional<Date>;
}

export class Discrepancy extends Model<InferAttributes<Discrepancy>, InferCreationAttributes<Discrepancy>> {
	declare id: CreationOptional<number>;
	declare protocol_id: number;
	declare round: number;
	declare position: number;
	declare test_code: string;
	declare field: Field;
	declare pass: 'first' | 'second' | 'both';
	declare kind: Kind;
	declare value: string | null;
	declare other: string | null;
	declare expected: string | null;
	/** reconcile.md rule 5: the reference from the other pass's raw score. */
	declare alternative: CreationOptional<string | null>;
	declare out_of_range: CreationOptional<number>;
	declare resolution: CreationOptional<Resolution | null>;
	declare resolved_value: CreationOptional<string | null>;
	declare note: CreationOptional<string | null>;
	declare resolved_by: CreationOptional<number | null>;
	declare resolved_at: CreationOptional<Date | null>;
	declare lock_version: CreationOptional<number>;
	declare settled_by: CreationOptional<SettledBy | null>;
	declare settled_by_id: CreationOptional<number | null>;
	declare carried_from: CreationOptional<number | null>;
}

export class Attachment extends Model<InferAttributes<Attachment>, InferCreationAttributes<Attachment>> {
	declare id: CreationOptional<number>;
	declare protocol_id: number;
	declare filename: string;
	declare mime: string;
	declare size: number;
	declare sha256: string;
	declare storage_name: string;
	declare uploaded_by: number;
	declare created_at: CreationOptional<Date>;
}

/** Plain rows (what services pass around and pages receive). */
export type ProtocolRow = InferAttributes<Protocol>;
export type PassRow = InferAttributes<Pass>;
export type DiscrepancyRow = InferAttributes<Discrepancy>;
export type ExamineeRow = InferAttributes<Examinee>;
export type AttachmentRow = InferAttributes<Attachment>;

/** Binds the models to a connection and declares the associations the services walk. */
export function initProtocolModels(sequelize: Sequelize, others: { ProtocolComposite: ModelStatic<Model>; Amendment: ModelStatic<Model> }) {
	Examinee.init(
		{
			id: id(),
			code: { ...text(40, false), validate: { len: [1, 40] } },
			name: text(160, true),
			birth_date: { type: DataTypes.DATEONLY, allowNull: false },
			sex: { type: DataTypes.ENUM('F', 'M', 'X'), allowNull: true },
			education_years: { type: DataTypes.TINYINT.UNSIGNED, allowNull: true, validate: { min: 0, max: 255 } },
			created_by: ref(true),
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'examinees', timestamps: false }
	);
	Protocol.init(
		{
			id: id(),
			examinee_id: ref(),
			battery_id: ref(),
			norm_set_id: ref(),
			test_date: { type: DataTypes.DATEONLY, allowNull: false },
			age_text: text(20, false),
			age_months: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
			covariates: jsonColumn('covariates', true),
			status: { type: DataTypes.ENUM('draft', 'awaiting_second', 'in_review', 'verified'), allowNull: false, defaultValue: 'draft' },
			round: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1 },
			first_scorer_id: ref(),
			second_scorer_id: ref(),
			reviewer_id: ref(),
			lock_version: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1 },
			status_changed_at: stampedAt(),
			verified_at: { type: DataTypes.DATE(3), allowNull: true },
			verified_by: ref(true),
			created_by: ref(true),
			created_at: stampedAt()
		},
		{
			sequelize,
			tableName: 'protocols',
			timestamps: false,
			version: 'lock_version',
			validate: {
				// CHECK protocols_duties
				separateDuties(this: Protocol) {
					const { first_scorer_id: a, second_scorer_id: b, reviewer_id: r } = this;
					if (a === undefined || b === undefined || r === undefined) return; // a partial update (Protocol.update of other columns)
					if (a === b || r === a || r === b) throw new Error('The two scorers and the reviewer must be three different people.');
				}
			}
		}
	);
	ProtocolTest.init(
		{
			protocol_id: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
			position: { type: DataTypes.INTEGER.UNSIGNED, primaryKey: true },
			test_id: ref(),
			norm_group_id: ref(true),
			override_reason: { type: DataTypes.TEXT, allowNull: true }
		},
		{ sequelize, tableName: 'protocol_tests', timestamps: false }
	);
	Pass.init(
		{
			id: id(),
			protocol_id: ref(),
			round: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1 },
			which: { type: DataTypes.ENUM('first', 'second'), allowNull: false },
			scorer_id: ref(),
			status: { type: DataTypes.ENUM('draft', 'submitted'), allowNull: false, defaultValue: 'draft' },
			scores: jsonColumn('scores', false),
			fields_entered: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 0 },
			draft_version: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 0 },
			submitted_at: { type: DataTypes.DATE(3), allowNull: true },
			// ON UPDATE CURRENT_TIMESTAMP(3): the database keeps it
			updated_at: stampedAt()
		},
		{ sequelize, tableName: 'passes', timestamps: false }
	);
	Discrepancy.init(
		{
			id: id(),
			protocol_id: ref(),
			round: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1 },
			position: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
			test_code: text(40, false),
			field: { type: DataTypes.ENUM(...FIELDS), allowNull: false },
			pass: { type: DataTypes.ENUM('first', 'second', 'both'), allowNull: false },
			kind: { type: DataTypes.STRING(30), allowNull: false, validate: { isIn: [KINDS as unknown as string[]] } },
			value: text(40, true),
			other: text(40, true),
			expected: text(40, true),
			alternative: text(40, true),
			out_of_range: { type: DataTypes.TINYINT, allowNull: false, defaultValue: 0 },
			resolution: { type: DataTypes.ENUM('first', 'second', 'recomputed', 'other'), allowNull: true },
			resolved_value: text(40, true),
			note: { type: DataTypes.TEXT, allowNull: true },
			resolved_by: ref(true),
			resolved_at: { type: DataTypes.DATE(3), allowNull: true },
			lock_version: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1 },
			settled_by: { type: DataTypes.ENUM('raw_decision', 'amendment'), allowNull: true },
			settled_by_id: ref(true),
			carried_from: ref(true)
		},
		{
			sequelize,
			tableName: 'discrepancies',
			timestamps: false,
			version: 'lock_version',
			validate: {
				// CHECK discrepancies_resolution (00024): a decision is all four columns or none
				wholeDecision(this: Discrepancy) {
					const four: unknown[] = [this.resolution, this.resolved_value, this.resolved_at, this.resolved_by];
					if (four.includes(undefined)) return; // a partial update: the table's CHECK still holds the line
					const set = four.filter((v) => v !== null).length;
					if (set !== 0 && set !== 4) throw new Error('A resolution needs its choice, value, time and resolver together (or none of them).');
				}
			}
		}
	);
	Attachment.init(
		{
			id: id(),
			protocol_id: ref(),
			filename: text(200, false),
			mime: text(60, false),
			size: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
			sha256: { type: DataTypes.CHAR(64), allowNull: false, validate: { is: /^[0-9a-f]{64}$/ } },
			storage_name: text(100, false),
			uploaded_by: ref(),
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'attachments', timestamps: false }
	);

	const fk = { foreignKey: 'protocol_id', constraints: false };
	Examinee.hasMany(Protocol, { as: 'protocols', foreignKey: 'examinee_id', constraints: false });
	Protocol.belongsTo(Examinee, { as: 'examinee', foreignKey: 'examinee_id', constraints: false });
	Protocol.hasMany(Pass, { as: 'passes', ...fk });
	Protocol.hasMany(Discrepancy, { as: 'discrepancies', ...fk });
	Protocol.hasMany(Attachment, { as: 'attachments', ...fk });
	Protocol.hasMany(ProtocolTest, { as: 'protocolTests', ...fk });
	Protocol.hasMany(others.ProtocolComposite, { as: 'protocolComposites', ...fk });
	Protocol.hasMany(others.Amendment, { as: 'amendments', ...fk });
}

/** The classes, as `models()` hands them out (bound once it has run). */
export const PROTOCOL_MODELS = { Examinee, Protocol, ProtocolTest, Pass, Discrepancy, Attachment };

/** The database's clock (as the columns' defaults use), for a model update: `status_changed_at: dbNow()`. */
export const dbNow = () => fn('CURRENT_TIMESTAMP', 3) as unknown as Date;

/** Query options for a read in `t` (locked FOR UPDATE when asked); outside a transaction none. */
export const inTx = (t: Transaction | null | undefined, forUpdate = false) => (t ? { transaction: t, ...(forUpdate ? { lock: t.LOCK.UPDATE } : {}) } : {});

/** A read outside a transaction is safe to run again on a deadlock or a joining node (as `select` in ../db does). */
export const reading = <T>(t: Transaction | null | undefined, run: () => Promise<T>): Promise<T> => (t ? run() : readRetried(run));

/** Save an instance under its optimistic lock; a version moved meanwhile answers `onStale()` (a 409), never a 500. */
export async function saveLocked<M extends Model>(m: M, t: Transaction, onStale: () => Error | Promise<Error>): Promise<M> {
	try {
		return await m.save({ transaction: t });
	} catch (e) {
		if (e instanceof OptimisticLockError) throw await onStale();
		throw e;
	}
}

/**
 * The mail tables (migrations 00001 and 00022): `outbox`, written in the business transaction and
 * moved into BullMQ by the dispatcher, and `mail_log`, one row per idempotency key with the phase of
 * its send (see ../mail/deliver.ts). Registered by `models()` in ./index.ts.
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes, type Sequelize } from 'sequelize';
import { stampedAt } from './columns';

export type MailKind = 'invite' | 'reset' | 'review_first' | 'review_reminder' | 'verification_full';
export const MAIL_KINDS: readonly MailKind[] = ['invite', 'reset', 'review_first', 'review_reminder', 'verification_full'];

export type MailLogStatus = 'claimed' | 'sending' | 'sent' | 'uncertain';

export class Outbox extends Model<InferAttributes<Outbox>, InferCreationAttributes<Outbox>> {
	declare id: CreationOptional<number>;
	declare kind: MailKind;
	declare idempotency_key: string;
	/** The renderer's input (JSON); a review reminder carries `notBefore` (ms since epoch). */
	declare payload: Record<string, unknown>;
	declare created_at: CreationOptional<Date>;
	/** Handed to the queue (null: waiting for the dispatcher). */
	declare dispatched_at: CreationOptional<Date | null>;
	/** Failed for good: every retry refused, or nothing to send. */
	declare failed_at: CreationOptional<Date | null>;
	/** The delivery found nothing to send (the review had ended) and gave up for good: the sweep leaves it. */
	declare skipped_at: CreationOptional<Date | null>;
	declare attempts: CreationOptional<number>;
	declare last_error: CreationOptional<string | null>;
}

export class MailLog extends Model<InferAttributes<MailLog>, InferCreationAttributes<MailLog>> {
	declare id: CreationOptional<number>;
	declare idempotency_key: string;
	declare kind: MailKind;
	declare protocol_id: number | null;
	declare reminder_no: number | null;
	/** `a@x, b@y, cc:c@z`: the To addresses, then the Cc addresses prefixed `cc:`. */
	declare recipients: string;
	declare subject: string;
	declare message_id: CreationOptional<string | null>;
	declare status: CreationOptional<MailLogStatus>;
	declare created_at: CreationOptional<Date>;
	declare sending_at: CreationOptional<Date | null>;
	declare sent_at: CreationOptional<Date | null>;
}

/** The payload column is LONGTEXT with a JSON_VALID check: text in the table, an object here. */
const jsonPayload = {
	type: DataTypes.TEXT('long'),
	allowNull: false,
	get(this: Outbox) {
		const v = this.getDataValue('payload') as unknown;
		return typeof v === 'string' ? JSON.parse(v) : v;
	},
	set(this: Outbox, v: unknown) {
		this.setDataValue('payload', (typeof v === 'string' ? v : JSON.stringify(v)) as never);
	}
};

export function initMailModels(sequelize: Sequelize): void {
	Outbox.init(
		{
			id: { type: DataTypes.BIGINT.UNSIGNED, autoIncrement: true, primaryKey: true },
			kind: { type: DataTypes.STRING(40), allowNull: false, validate: { isIn: [MAIL_KINDS as MailKind[]] } },
			idempotency_key: { type: DataTypes.STRING(120), allowNull: false, unique: 'outbox_key' },
			payload: jsonPayload,
			created_at: stampedAt(),
			dispatched_at: { type: DataTypes.DATE(3), allowNull: true },
			failed_at: { type: DataTypes.DATE(3), allowNull: true },
			skipped_at: { type: DataTypes.DATE(3), allowNull: true },
			attempts: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 0 },
			last_error: { type: DataTypes.TEXT, allowNull: true }
		},
		{ sequelize, tableName: 'outbox', timestamps: false }
	);
	MailLog.init(
		{
			id: { type: DataTypes.BIGINT.UNSIGNED, autoIncrement: true, primaryKey: true },
			idempotency_key: { type: DataTypes.STRING(120), allowNull: false, unique: 'mail_log_key' },
			kind: { type: DataTypes.STRING(40), allowNull: false, validate: { isIn: [MAIL_KINDS as MailKind[]] } },
			protocol_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
			reminder_no: { type: DataTypes.INTEGER.UNSIGNED, allowNull: true },
			recipients: { type: DataTypes.TEXT, allowNull: false },
			subject: { type: DataTypes.STRING(300), allowNull: false, validate: { len: [0, 300] } },
			message_id: { type: DataTypes.STRING(200), allowNull: true },
			status: { type: DataTypes.ENUM('claimed', 'sending', 'sent', 'uncertain'), allowNull: false, defaultValue: 'claimed' },
			created_at: stampedAt(),
			sending_at: { type: DataTypes.DATE(3), allowNull: true },
			sent_at: { type: DataTypes.DATE(3), allowNull: true }
		},
		{ sequelize, tableName: 'mail_log', timestamps: false }
	);
	// "nothing logged for this row yet" reads (LEFT JOIN … IS NULL) go through this association
	if (!Outbox.associations.log) Outbox.hasOne(MailLog, { foreignKey: 'idempotency_key', sourceKey: 'idempotency_key', as: 'log', constraints: false });
}

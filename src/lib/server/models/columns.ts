/** Column definitions shared by the models (built fresh per call: Model.init writes into each definition). */
import { DataTypes, literal, type Model, type ModelAttributeColumnOptions } from 'sequelize';

/** A LONGTEXT column with MariaDB's JSON_VALID check: parsed on read, written as JSON text. */
export function jsonColumn(name: string, allowNull = false): ModelAttributeColumnOptions {
	return {
		type: DataTypes.TEXT('long'),
		allowNull,
		get(this: Model) {
			const v = this.getDataValue(name as never) as unknown;
			return typeof v === 'string' ? JSON.parse(v) : (v ?? null);
		},
		set(this: Model, v: unknown) {
			this.setDataValue(name as never, (v === null || v === undefined ? null : JSON.stringify(v)) as never);
		}
	};
}

/**
 * A DATETIME(3) column the database stamps when a row is created (the migrations' CURRENT_TIMESTAMP(3)):
 * the INSERT sends the database's clock, never the app server's, so two app servers with skewed clocks
 * still write times in one order. After `create` the instance holds the literal, not a Date: reload the
 * row if the value is needed (no service does).
 */
export function stampedAt(): ModelAttributeColumnOptions {
	return { type: DataTypes.DATE(3), allowNull: false, defaultValue: literal('CURRENT_TIMESTAMP(3)') };
}

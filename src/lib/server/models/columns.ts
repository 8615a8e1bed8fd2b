/** Column definitions shared by the models (built fresh per call: Model.init writes into each definition). */
import { DataTypes, type Model, type ModelAttributeColumnOptions } from 'sequelize';

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

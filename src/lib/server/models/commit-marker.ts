/**
 * A committed transaction's marker (table commit_markers, migration 00017): written as the last
 * statement of every `transaction()` so a COMMIT whose answer was lost can be checked afterwards.
 */
import { DataTypes, Model, Op, type CreationOptional, type InferAttributes, type InferCreationAttributes } from 'sequelize';
import type { Transaction } from 'sequelize';
import { autocommit, db } from '../db';
import { stampedAt } from './columns';

export class CommitMarker extends Model<InferAttributes<CommitMarker>, InferCreationAttributes<CommitMarker>> {
	declare id: string;
	declare created_at: CreationOptional<Date>;
}

let bound: ReturnType<typeof db> | null = null;
function model() {
	const sequelize = db();
	if (bound !== sequelize) {
		CommitMarker.init(
			{
				id: { type: DataTypes.CHAR(36), primaryKey: true },
				created_at: stampedAt()
			},
			{ sequelize, tableName: 'commit_markers', timestamps: false }
		);
		bound = sequelize;
	}
	return CommitMarker;
}

export async function writeMarker(id: string, t: Transaction): Promise<void> {
	await model().create({ id }, { transaction: t });
}

/** True when the transaction that wrote this marker was committed (read on any node: causal reads). */
export async function markerCommitted(id: string): Promise<boolean> {
	return (await model().findByPk(id, { attributes: ['id'] })) !== null;
}

/** Markers older than an hour are only history: the worker deletes them in batches. */
export async function sweepMarkers(olderThanMs = 3_600_000): Promise<number> {
	return autocommit(() => model().destroy({ where: { created_at: { [Op.lt]: new Date(Date.now() - olderThanMs) } }, limit: 5000 }));
}

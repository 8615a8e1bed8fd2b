/**
 * Models of the accounts and site settings (db/migrations/00001-initial.ts): users, their one-time
 * set-password tokens (only the SHA-256 of a token is stored), and the `settings` rows (JSON values).
 * `users.session_version` ends sessions (src/lib/server/session.ts); it is not an optimistic lock.
 * Bound by `models()` in ./index.ts.
 */
import { DataTypes, Model, type CreationOptional, type InferAttributes, type InferCreationAttributes, type NonAttribute, type Sequelize } from 'sequelize';
import { jsonColumn, stampedAt } from './columns';

export class User extends Model<InferAttributes<User>, InferCreationAttributes<User>> {
	declare id: CreationOptional<number>;
	declare email: string;
	declare name: string;
	/** Null for an invited account that has not set a password yet. */
	declare password_hash: string | null;
	/** Comma-separated roles (src/lib/roles.ts). */
	declare roles: CreationOptional<string>;
	declare active: CreationOptional<boolean>;
	declare session_version: CreationOptional<number>;
	declare last_sign_in_at: CreationOptional<Date | null>;
	declare created_at: CreationOptional<Date>;
	declare updated_at: CreationOptional<Date>;
	declare tokens?: NonAttribute<UserToken[]>;
}

export class UserToken extends Model<InferAttributes<UserToken>, InferCreationAttributes<UserToken>> {
	declare id: CreationOptional<number>;
	declare user_id: number;
	declare purpose: 'invite' | 'reset';
	declare token_hash: string;
	declare expires_at: Date;
	declare used_at: CreationOptional<Date | null>;
	declare created_at: CreationOptional<Date>;
	declare user?: NonAttribute<User>;
}

export class Setting extends Model<InferAttributes<Setting>, InferCreationAttributes<Setting>> {
	declare name: string;
	declare value: unknown;
	declare updated_at: CreationOptional<Date>;
}

export const peopleModels = { User, UserToken, Setting };

export function initPeopleModels(sequelize: Sequelize): void {
	User.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			email: { type: DataTypes.STRING(254), allowNull: false, unique: 'users_email', validate: { len: [3, 254] } },
			name: { type: DataTypes.STRING(120), allowNull: false, validate: { len: [1, 120] } },
			password_hash: { type: DataTypes.STRING(100), allowNull: true },
			roles: { type: DataTypes.STRING(100), allowNull: false, defaultValue: '', validate: { len: [0, 100] } },
			active: { type: DataTypes.BOOLEAN, allowNull: false, defaultValue: true },
			session_version: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false, defaultValue: 1, validate: { min: 0 } },
			last_sign_in_at: { type: DataTypes.DATE(3), allowNull: true },
			created_at: stampedAt(),
			// ON UPDATE CURRENT_TIMESTAMP(3) in the schema: the database keeps it
			updated_at: stampedAt()
		},
		{ sequelize, tableName: 'users', timestamps: false }
	);
	UserToken.init(
		{
			id: { type: DataTypes.INTEGER.UNSIGNED, autoIncrement: true, primaryKey: true },
			user_id: { type: DataTypes.INTEGER.UNSIGNED, allowNull: false },
			purpose: { type: DataTypes.ENUM('invite', 'reset'), allowNull: false },
			token_hash: { type: DataTypes.CHAR(64), allowNull: false, unique: 'user_tokens_hash', validate: { len: [64, 64] } },
			expires_at: { type: DataTypes.DATE(3), allowNull: false },
			used_at: { type: DataTypes.DATE(3), allowNull: true },
			created_at: stampedAt()
		},
		{ sequelize, tableName: 'user_tokens', timestamps: false }
	);
	Setting.init(
		{
			name: { type: DataTypes.STRING(64), primaryKey: true, validate: { len: [1, 64] } },
			value: jsonColumn('value'),
			updated_at: stampedAt()
		},
		{ sequelize, tableName: 'settings', timestamps: false }
	);
	User.hasMany(UserToken, { foreignKey: 'user_id', as: 'tokens' });
	UserToken.belongsTo(User, { foreignKey: 'user_id', as: 'user' });
}

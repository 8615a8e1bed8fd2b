/**
 * Runs the migrations under db/migrations with umzug, then sets the app user's grants: full
 * read/write on every table except the append-only ones (SELECT, INSERT only).
 * Connects as an administrative account: root over MIGRATE_SOCKET (what npm start/test do), or
 * MIGRATE_DB_USER/MIGRATE_DB_PASSWORD over TCP.
 */
import { Sequelize } from 'sequelize';
import * as mariadb from 'mariadb';
import { Umzug, SequelizeStorage } from 'umzug';
import { migrations, appendOnlyTables } from '../db/migrations/index';

const env = process.env;
const dbName = env.DB_NAME ?? 'crosstally';
const appUser = env.DB_USER ?? 'crosstally';
const socket = env.MIGRATE_SOCKET;

const sequelize = new Sequelize(dbName, env.MIGRATE_DB_USER ?? 'root', env.MIGRATE_DB_PASSWORD ?? '', {
	dialect: 'mariadb',
	dialectModule: mariadb,
	logging: false,
	timezone: '+00:00',
	...(socket ? { dialectOptions: { socketPath: socket } } : { host: env.DB_HOST ?? '127.0.0.1', port: Number(env.DB_PORT ?? 3307) })
});

export const umzug = new Umzug({
	migrations: migrations.map((m) => ({ name: m.name, up: m.up, down: m.down })),
	context: sequelize.getQueryInterface(),
	storage: new SequelizeStorage({ sequelize, tableName: 'schema_migrations' }),
	logger: undefined
});

async function grants() {
	const rows = (await sequelize.query(`SELECT table_name AS t FROM information_schema.tables WHERE table_schema = :db AND table_type = 'BASE TABLE'`, {
		replacements: { db: dbName },
		type: 'SELECT'
	})) as { t: string }[];
	for (const host of ['127.0.0.1', 'localhost']) {
		const who = `'${appUser}'@'${host}'`;
		const exists = await sequelize.query(`SELECT 1 FROM mysql.user WHERE User = :u AND Host = :h`, {
			replacements: { u: appUser, h: host },
			type: 'SELECT'
		});
		if (exists.length === 0) continue;
		// Start from nothing on this database (only this one: another database on the same server,
		// e.g. a restored copy, keeps its grants), then grant table by table.
		await sequelize.query(`REVOKE ALL PRIVILEGES, GRANT OPTION ON \`${dbName}\`.* FROM ${who}`).catch(() => undefined);
		const tablePrivs = (await sequelize.query(`SELECT Table_name AS t FROM mysql.tables_priv WHERE User = :u AND Host = :h AND Db = :db`, {
			replacements: { u: appUser, h: host, db: dbName },
			type: 'SELECT'
		})) as { t: string }[];
		for (const { t } of tablePrivs) await sequelize.query(`REVOKE ALL PRIVILEGES, GRANT OPTION ON \`${dbName}\`.\`${t}\` FROM ${who}`).catch(() => undefined);
		for (const { t } of rows) {
			const privs = t === 'schema_migrations' ? 'SELECT' : appendOnlyTables.includes(t) ? 'SELECT, INSERT' : 'SELECT, INSERT, UPDATE, DELETE';
			await sequelize.query(`GRANT ${privs} ON \`${dbName}\`.\`${t}\` TO ${who}`);
		}
	}
	await sequelize.query('FLUSH PRIVILEGES');
}

async function main() {
	const direction = process.argv[2] ?? 'up';
	if (direction === 'down') await umzug.down({ to: 0 });
	else {
		const done = await umzug.up();
		if (done.length) console.error(`[crosstally] applied migrations: ${done.map((m) => m.name).join(', ')}`);
	}
	await grants();
	await sequelize.close();
}

main().catch(async (e) => {
	console.error(`[crosstally] migration failed: ${e instanceof Error ? e.message : e}`);
	await sequelize.close().catch(() => undefined);
	process.exit(1);
});

/**
 * Seeds. `demo`: the invented clinic, once, when the database has no users (a second npm start
 * seeds nothing). `test`: the accounts the tests sign in with.
 * All names, tests and norms here are invented for the demo.
 */
import { closeDb, selectOne } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { seedAccounts } from './accounts';

async function main() {
	const which = process.argv[2] ?? 'demo';
	const existing = await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM users');
	if (existing && existing.n > 0) {
		console.error(`[crosstally] database already has data: not seeding`);
		return;
	}
	console.error(`[crosstally] seeding ${which} data`);
	await seedAccounts();
	const extra = await import('./demo').catch(() => null);
	if (extra && typeof extra.seedDemo === 'function') await extra.seedDemo(which);
}

main()
	.catch((e) => {
		console.error(`[crosstally] seeding failed: ${e instanceof Error ? e.stack : e}`);
		console.error('[crosstally] the database is partly seeded: stop, delete the data folder ($CROSSTALLY_DATA_DIR) and start again');
		process.exitCode = 1;
	})
	// the demo's protocols in review and invitations wake the dispatcher (src/lib/server/mail/wake.ts): the
	// Redis connection that opened would keep the process alive
	.finally(async () => {
		await closeDb();
		await closeRedis();
	});

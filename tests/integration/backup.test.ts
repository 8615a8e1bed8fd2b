/**
 * npm run backup / npm run restore: the test database (after whatever ran before) is dumped with
 * its checksum, restored into a scratch database, and every table compared by row count and
 * CHECKSUM TABLE. The worker is stopped meanwhile so nothing changes under the comparison.
 * Also: a damaged file and a non-empty target are refused; --force replaces; grants come back.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { appendFileSync, copyFileSync, existsSync, readFileSync } from 'node:fs';
import * as mariadb from 'mariadb';
import { restoreServices, rootQuery, stopWorker } from '../helpers/services';
import { config } from '../../src/lib/server/config';
import { closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

const SCRATCH = `${config.db.name}_restore`;
const npm = (args: string[]) => spawnSync('npm', ['run', '--silent', ...args], { encoding: 'utf8', env: process.env, timeout: 120_000 });

async function tableStats(db: string): Promise<Record<string, { rows: number; checksum: number }>> {
	const tables = await rootQuery<{ t: string }>(
		"SELECT table_name AS t FROM information_schema.tables WHERE table_schema = ? AND table_type = 'BASE TABLE' ORDER BY table_name",
		[db]
	);
	const out: Record<string, { rows: number; checksum: number }> = {};
	for (const { t } of tables) {
		const [{ n }] = await rootQuery<{ n: number }>(`SELECT COUNT(*) AS n FROM \`${db}\`.\`${t}\``);
		const [c] = await rootQuery<{ Checksum: number }>(`CHECKSUM TABLE \`${db}\`.\`${t}\` EXTENDED`);
		out[t] = { rows: Number(n), checksum: Number(c.Checksum) };
	}
	return out;
}

beforeAll(async () => {
	await stopWorker();
	await rootQuery(`DROP DATABASE IF EXISTS \`${SCRATCH}\``);
});
afterAll(async () => {
	await rootQuery(`DROP DATABASE IF EXISTS \`${SCRATCH}\``);
	await restoreServices();
	await closeRedis();
	await closeDb();
}, 60_000);

describe('backup and restore', () => {
	let file = '';
	it('npm run backup writes a gzipped single-transaction dump and its SHA-256', () => {
		const r = npm(['backup']);
		expect(r.status, r.stderr).toBe(0);
		file = r.stdout.trim().split('\n').pop()!;
		expect(file).toMatch(/backups\/crosstally-.+\.sql\.gz$/);
		expect(file.startsWith(config.dataDir)).toBe(true);
		expect(existsSync(`${file}.sha256`)).toBe(true);
		expect(readFileSync(`${file}.sha256`, 'utf8')).toMatch(/^[0-9a-f]{64} {2}crosstally-.+\.sql\.gz\n$/);
		const sql = spawnSync('gunzip', ['-c', file], { encoding: 'utf8', maxBuffer: 512 * 1024 * 1024 }).stdout;
		expect(sql).toContain('CREATE TABLE `audit_events`');
		expect(sql).toMatch(/-- Dump completed/);
		expect(sql).not.toMatch(/CREATE DATABASE|^USE /m); // restorable under any name
	});

	it('npm run restore puts every table back exactly (row counts and checksums)', async () => {
		const r = npm(['restore', '--', file, '--database', SCRATCH]);
		expect(r.status, r.stderr).toBe(0);
		const [live, restored] = [await tableStats(config.db.name), await tableStats(SCRATCH)];
		expect(Object.keys(restored).length).toBeGreaterThanOrEqual(20);
		expect(restored).toEqual(live);
		expect(restored.audit_events.rows).toBeGreaterThan(0);
		expect(restored.users.rows).toBeGreaterThan(0);
	}, 120_000);

	it('the restored database has the app grants again (audit trail append-only), and the live one kept its own', async () => {
		for (const db of [SCRATCH, config.db.name]) {
			const conn = await mariadb.createConnection({
				host: '127.0.0.1',
				port: config.db.port,
				user: config.db.user,
				password: config.db.password,
				database: db
			});
			try {
				expect((await conn.query('SELECT COUNT(*) AS n FROM users'))[0].n).toBeGreaterThan(0);
				await expect(conn.query("UPDATE audit_events SET action = 'x' LIMIT 1")).rejects.toThrow(/UPDATE command denied/);
				await expect(conn.query('DELETE FROM audit_events LIMIT 1')).rejects.toThrow(/DELETE command denied/);
			} finally {
				await conn.end();
			}
		}
	});

	it('refuses a database that is not empty unless --force', async () => {
		const r = npm(['restore', '--', file, '--database', SCRATCH]);
		expect(r.status).not.toBe(0);
		expect(r.stderr).toMatch(/is not empty/);
		await rootQuery(`CREATE TABLE \`${SCRATCH}\`.\`stray\` (id INT)`);
		const f = npm(['restore', '--', file, '--database', SCRATCH, '--force']);
		expect(f.status, f.stderr).toBe(0);
		expect(await rootQuery("SELECT 1 FROM information_schema.tables WHERE table_schema = ? AND table_name = 'stray'", [SCRATCH])).toEqual([]);
	}, 120_000);

	it('refuses a damaged file or one without its checksum, and restores nothing', async () => {
		await rootQuery(`DROP DATABASE IF EXISTS \`${SCRATCH}\``);
		const bad = file.replace(/\.sql\.gz$/, '-damaged.sql.gz');
		copyFileSync(file, bad);
		copyFileSync(`${file}.sha256`, `${bad}.sha256`);
		appendFileSync(bad, Buffer.from([0]));
		const r = npm(['restore', '--', bad, '--database', SCRATCH]);
		expect(r.status).not.toBe(0);
		expect(r.stderr).toMatch(/checksum mismatch/);
		const lone = file.replace(/\.sql\.gz$/, '-lone.sql.gz');
		copyFileSync(file, lone);
		expect(npm(['restore', '--', lone, '--database', SCRATCH]).stderr).toMatch(/no checksum file/);
		expect(await rootQuery('SELECT 1 FROM information_schema.schemata WHERE schema_name = ?', [SCRATCH])).toEqual([]);
	});
});

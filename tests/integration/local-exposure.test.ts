/**
 * Local exposure (issue 12, item 15), against the services npm test started: MariaDB's root only
 * over the socket by unix_socket (no root over TCP, the socket in a 0700 folder), Redis asks for
 * the generated password, uploaded scans and caught mail are 0600 files in 0700 folders.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import * as mariadb from 'mariadb';
import { connect } from 'node:net';
import { signedIn, ACCOUNTS, caughtMail, waitFor } from '../helpers/http';
import { createViaForm } from '../helpers/workflow';
import { rootQuery, runDir, redisCli } from '../helpers/services';
import { closeDb, selectOne } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { config } from '../../src/lib/server/config';

afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const mode = (p: string) => statSync(p).mode & 0o777;
const octal = (m: number) => `0${m.toString(8)}`;

describe('MariaDB root (item 15)', () => {
	it('root cannot sign in over TCP, with or without a password', async () => {
		for (const password of ['', 'root', config.db.password]) {
			const err = await mariadb
				.createConnection({ host: '127.0.0.1', port: config.db.port, user: 'root', password, connectTimeout: 5_000 })
				.then(async (c) => {
					await c.end();
					return null;
				})
				.catch((e: { errno?: number; message: string }) => e);
			expect(err, `root over TCP with password "${password ? '…' : ''}"`).not.toBeNull();
			// 1045 access denied, 1130 host not allowed, 1698 unix_socket over TCP
			expect([1045, 1130, 1698]).toContain(err!.errno);
		}
	});

	it('root exists only as root@localhost by unix_socket, and the socket is in a 0700 folder', async () => {
		const rows = await rootQuery<{ user: string; host: string; plugin: string }>(
			"SELECT user AS user, host AS host, plugin AS plugin FROM mysql.user WHERE user = 'root' OR user = ''"
		);
		expect(rows).toEqual([{ user: 'root', host: 'localhost', plugin: 'unix_socket' }]);
		expect(octal(mode(runDir()))).toBe('0700');
		expect(statSync(join(runDir(), 'mariadb.sock')).isSocket()).toBe(true);
		expect(octal(mode(process.env.CROSSTALLY_DATA_DIR!))).toBe('0700');
	});
});

describe('Redis password (item 15)', () => {
	it('Redis refuses commands without the password and accepts them with it', async () => {
		// a plain connection, as any local process could open one: RESP "PING" and "GET"
		const answer = await new Promise<string>((resolve, reject) => {
			const sock = connect(Number(process.env.REDIS_PORT), '127.0.0.1', () => sock.write('PING\r\nGET ct:session:epoch\r\n'));
			let got = '';
			sock.on('data', (d) => {
				got += d.toString();
				if (got.split('\r\n').length > 2) {
					sock.destroy();
					resolve(got);
				}
			});
			sock.on('error', reject);
		});
		expect(
			answer
				.split('\r\n')
				.slice(0, 2)
				.every((l) => l.startsWith('-NOAUTH'))
		).toBe(true);
		const plain = redisCli('ping'); // with the password, as the scripts do
		expect(plain.stdout.toString().trim()).toBe('PONG');
		expect(config.redisUrl).toMatch(/^redis:\/\/:[\w-]{20,}@127\.0\.0\.1:/);
		// the password is not on redis-server's command line (ps shows that to every local user); it is in a 0600 file
		const pid = Number(readFileSync(join(runDir(), 'redis.pid'), 'utf8').trim());
		const cmdline = readFileSync(`/proc/${pid}/cmdline`, 'utf8');
		expect(cmdline).not.toContain(process.env.REDIS_PASSWORD!);
		expect(octal(mode(join(runDir(), 'redis.conf')))).toBe('0600');
	});
});

describe('files on disk (item 15)', () => {
	it('an uploaded scan is 0600 in a 0700 folder', async () => {
		const lead = await signedIn('lead');
		const sam = await signedIn('scorer');
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer });
		const fd = new FormData();
		fd.append('file', new File([new Uint8Array([0x25, 0x50, 0x44, 0x46, 0x2d, 0x31, 0x2e, 0x34, 0x0a])], 'scan.pdf'));
		const res = await sam.request(`/protocols/${id}?/upload`, {
			method: 'POST',
			body: fd,
			headers: { 'x-sveltekit-action': 'true', accept: 'application/json' }
		});
		expect((await res.json()).type).toBe('success');
		const row = await selectOne<{ storage_name: string }>('SELECT storage_name FROM attachments WHERE protocol_id = :id', { id });
		const dir = join(config.dataDir, 'uploads');
		expect(octal(mode(dir))).toBe('0700');
		expect(octal(mode(join(dir, row!.storage_name)))).toBe('0600');
	});

	it('caught mail is 0600 in a 0700 folder', async () => {
		const email = `mode-${Date.now()}@clinic.test`;
		const admin = await signedIn('admin');
		expect((await admin.action('/people?/invite', { name: 'Mode Probe', email, roles: ['scorer'] })).body.type).toBe('success');
		const [m] = await waitFor(async () => {
			const x = await caughtMail(email);
			return x.length ? x : null;
		});
		const dir = join(config.dataDir, 'mail');
		expect(octal(mode(dir))).toBe('0700');
		expect(octal(mode(join(dir, `${m.id}.json`)))).toBe('0600');
	});
});

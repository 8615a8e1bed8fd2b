/**
 * Galera health for HAProxy (scripts/cluster/cluster.sh): one small HTTP server per database node,
 * on CLUSTER_BASE+51..53, answering 200 only while the node says `wsrep_local_state_comment =
 * Synced` and `wsrep_ready = ON`, else 503. A node that is down, joining (state transfer) or
 * donating is therefore out of the balancer's rotation. Reads the node over its own socket as root.
 */
import { createServer } from 'node:http';
import { join } from 'node:path';
import * as mariadb from 'mariadb';

const base = Number(process.env.CLUSTER_BASE ?? 4400);
const runDir = process.env.RUN_DIR ?? join(process.cwd(), '.data/cluster/run');

async function state(n: number): Promise<string> {
	let conn: mariadb.Connection | null = null;
	try {
		conn = await mariadb.createConnection({ socketPath: join(runDir, `db${n}.sock`), user: 'root', password: '', connectTimeout: 800 });
		const rows = (await conn.query("SHOW STATUS WHERE Variable_name IN ('wsrep_local_state_comment', 'wsrep_ready')")) as {
			Variable_name: string;
			Value: string;
		}[];
		const v = Object.fromEntries(rows.map((r) => [r.Variable_name, r.Value]));
		return v.wsrep_ready === 'ON' ? v.wsrep_local_state_comment : `${v.wsrep_local_state_comment ?? 'unknown'} (not ready)`;
	} catch (e) {
		return `unreachable: ${(e as Error).message.split('\n')[0]}`;
	} finally {
		await conn?.end().catch(() => undefined);
	}
}

for (const n of [1, 2, 3]) {
	createServer(async (_req, res) => {
		const s = await state(n);
		res.writeHead(s === 'Synced' ? 200 : 503, { 'content-type': 'text/plain' });
		res.end(`db${n}: ${s}\n`);
	}).listen(base + 50 + n, '127.0.0.1');
}
console.error(`[dbcheck] Galera health on 127.0.0.1:${base + 51}-${base + 53}`);

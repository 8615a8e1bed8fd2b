/**
 * The local mail fake for demo and test mode: an SMTP server on loopback (smtp-server) that keeps
 * every message it receives, and a small HTTP API on loopback to read them:
 *   GET /health, GET /messages[?to=&limit=&offset=&newest=1&summary=1], GET /messages/:id, DELETE /messages,
 *   POST /faults {"refuse": n}  — refuse the next n messages with a temporary 451 (for retry tests).
 * Messages are kept as JSON files under $CROSSTALLY_DATA_DIR/mail so a restart loses none, and in
 * memory (read once at start), so a list does not re-read thousands of files (a full test run
 * leaves ~3000). `limit`/`offset` page the list, `newest=1` puts the newest first, `summary=1`
 * leaves out the bodies and headers; the total before paging is in `X-Total-Count`.
 */
import { SMTPServer } from 'smtp-server';
import { simpleParser } from 'mailparser';
import { createServer } from 'node:http';
import { chmodSync, mkdirSync, readdirSync, readFileSync, writeFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { randomUUID } from 'node:crypto';

const smtpPort = Number(process.env.SMTP_PORT ?? 2525);
const httpPort = Number(process.env.MAILFAKE_PORT ?? 2526);
const dir = join(process.env.CROSSTALLY_DATA_DIR ?? '.data/demo', 'mail');
// Caught mail holds set-password links: readable by the owner only (a 0700 folder, 0600 files).
const ensureDir = () => {
	mkdirSync(dir, { recursive: true, mode: 0o700 });
	chmodSync(dir, 0o700);
};
ensureDir();

interface Caught {
	id: string;
	receivedAt: string;
	envelope: { from: string | null; to: string[] };
	from: string;
	to: string;
	cc: string;
	subject: string;
	messageId: string | null;
	headers: Record<string, string>;
	text: string;
	html: string | null;
}

/**
 * A message as kept at receipt: the envelope and the raw bytes (as a latin1 string, so JSON keeps every
 * byte), parsed with mailparser only when something reads it (issue 18: parsing at receipt was most of
 * the fake's CPU per message, on the machine the worker shares; most caught mail is never read). A file
 * written by an earlier fake holds the parsed form and is read as it is.
 */
type Kept = Pick<Caught, 'id' | 'receivedAt' | 'envelope'> & { raw?: string; parsed?: Caught; parsing?: Promise<Caught> };

async function parsedOf(m: Kept): Promise<Caught> {
	if (m.parsed) return m.parsed;
	m.parsing ??= (async () => {
		// the catch keeps text and html as sent: no text-to-HTML with linkified links (its textAsHtml), and no
		// image links rewritten
		const parsed = await simpleParser(Buffer.from(m.raw ?? '', 'latin1'), { skipTextToHtml: true, skipTextLinks: true, skipImageLinks: true });
		const headers: Record<string, string> = {};
		for (const [k, v] of parsed.headers) headers[k] = typeof v === 'string' ? v : JSON.stringify(v);
		const out: Caught = {
			id: m.id,
			receivedAt: m.receivedAt,
			envelope: m.envelope,
			from: addr(parsed.from),
			to: addr(parsed.to),
			cc: addr(parsed.cc),
			subject: parsed.subject ?? '',
			messageId: parsed.messageId ?? null,
			headers,
			text: parsed.text ?? '',
			html: typeof parsed.html === 'string' ? parsed.html : null
		};
		m.parsed = out;
		delete m.raw;
		return out;
	})();
	return m.parsing;
}

/** A kept message from its file: the raw form (this fake) or the parsed one (an earlier fake). */
function keptOf(json: string): Kept {
	const x = JSON.parse(json) as Kept & Partial<Caught>;
	if (typeof x.raw === 'string') return { id: x.id, receivedAt: x.receivedAt, envelope: x.envelope, raw: x.raw };
	return { id: x.id, receivedAt: x.receivedAt, envelope: x.envelope, parsed: x as Caught };
}

let refuseNext = 0;

// ISO times and ids compare as plain strings (no locale rules: this runs for every message caught)
const cmp = (x: string, y: string) => (x < y ? -1 : x > y ? 1 : 0);
const byTime = (a: Kept, b: Kept) => cmp(a.receivedAt, b.receivedAt) || cmp(a.id, b.id);
/** Every caught message, oldest first. */
let caught: Kept[] = readdirSync(dir)
	.filter((f) => f.endsWith('.json'))
	.map((f) => keptOf(readFileSync(join(dir, f), 'utf8')))
	.sort(byTime);

function list(): Kept[] {
	return caught;
}

const addr = (a: unknown): string => {
	if (!a) return '';
	const arr = Array.isArray(a) ? a : [a];
	return arr.map((x: { text?: string }) => x.text ?? '').join(', ');
};

const smtp = new SMTPServer({
	disabledCommands: ['STARTTLS', 'AUTH'],
	authOptional: true,
	logger: false,
	size: 10 * 1024 * 1024,
	onData(stream, session, callback) {
		const chunks: Buffer[] = [];
		stream.on('data', (c: Buffer) => chunks.push(c));
		stream.on('end', async () => {
			if (refuseNext > 0) {
				refuseNext--;
				const err = new Error('Temporary failure (mail fake refusing on request)') as Error & { responseCode: number };
				err.responseCode = 451;
				return callback(err);
			}
			try {
				const msg: Kept = {
					id: `${Date.now().toString(36)}-${randomUUID().slice(0, 8)}`,
					receivedAt: new Date().toISOString(),
					envelope: {
						from: session.envelope.mailFrom ? session.envelope.mailFrom.address : null,
						to: session.envelope.rcptTo.map((r) => r.address)
					},
					raw: Buffer.concat(chunks).toString('latin1')
				};
				writeFileSync(join(dir, `${msg.id}.json`), JSON.stringify({ id: msg.id, receivedAt: msg.receivedAt, envelope: msg.envelope, raw: msg.raw }), {
					mode: 0o600
				});
				// into its place (messages caught in the same millisecond arrive in any order): a binary search from
				// the end, not a sort of the whole catch per message
				let at = caught.length;
				if (at > 0 && byTime(caught[at - 1], msg) > 0) {
					let lo = 0;
					while (lo < at) {
						const mid = (lo + at) >> 1;
						if (byTime(caught[mid], msg) > 0) at = mid;
						else lo = mid + 1;
					}
				}
				caught.splice(at, 0, msg);
				callback();
			} catch (e) {
				callback(e as Error);
			}
		});
	}
});
smtp.on('error', (e) => console.error('smtp error', e.message));
smtp.listen(smtpPort, '127.0.0.1');

const http = createServer(async (req, res) => {
	const url = new URL(req.url ?? '/', 'http://x');
	const send = (status: number, body: unknown, headers: Record<string, string> = {}) => {
		res.writeHead(status, { 'content-type': 'application/json', ...headers });
		res.end(JSON.stringify(body));
	};
	if (url.pathname === '/health') return send(200, { ok: true });
	if (url.pathname === '/messages' && req.method === 'GET') {
		const to = url.searchParams.get('to');
		let all = list();
		if (to) all = all.filter((m) => m.envelope.to.some((t) => t.toLowerCase() === to.toLowerCase()));
		const total = all.length;
		if (url.searchParams.get('newest') === '1') all = [...all].reverse();
		const offset = Math.max(0, Number(url.searchParams.get('offset') ?? 0) || 0);
		const limit = url.searchParams.has('limit') ? Math.max(0, Number(url.searchParams.get('limit')) || 0) : all.length;
		all = all.slice(offset, offset + limit);
		let page: Caught[];
		try {
			page = await Promise.all(all.map(parsedOf)); // only the page asked for is parsed (once)
		} catch (e) {
			return send(500, { error: `could not parse a caught message: ${e instanceof Error ? e.message : e}` });
		}
		const body =
			url.searchParams.get('summary') === '1'
				? page.map(({ id, receivedAt, envelope, from, to, cc, subject }) => ({ id, receivedAt, envelope, from, to, cc, subject }))
				: page;
		return send(200, body, { 'x-total-count': String(total) });
	}
	if (url.pathname === '/messages' && req.method === 'DELETE') {
		rmSync(dir, { recursive: true, force: true });
		ensureDir();
		caught = [];
		return send(200, { ok: true });
	}
	const m = url.pathname.match(/^\/messages\/([\w-]+)$/);
	if (m) {
		const kept = caught.find((x) => x.id === m[1]);
		if (kept) return send(200, await parsedOf(kept));
		try {
			return send(200, await parsedOf(keptOf(readFileSync(join(dir, `${m[1]}.json`), 'utf8'))));
		} catch {
			return send(404, { error: 'no such message' });
		}
	}
	if (url.pathname === '/faults' && req.method === 'POST') {
		let body = '';
		req.on('data', (c) => (body += c));
		req.on('end', () => {
			try {
				refuseNext = Number(JSON.parse(body).refuse ?? 0);
				send(200, { refuse: refuseNext });
			} catch {
				send(400, { error: 'expected {"refuse": n}' });
			}
		});
		return;
	}
	send(404, { error: 'not found' });
});
http.listen(httpPort, '127.0.0.1');

// Every accepted message is on disk before its 250 (writeFileSync above), so a stop need not wait for the
// SMTP connections the worker's pool keeps open (smtp-server's close would wait for them up to 30 s).
// Started as `node --import tsx scripts/mailfake.ts` (scripts/lib/setup.sh), this process is the one in
// mailfake.pid and gets the TERM itself; the line below says it ended by this handler, not by a KILL.
const stop = (signal: NodeJS.Signals) => {
	smtp.close(() => undefined);
	http.close();
	console.log(`mail fake stopped (${signal})`);
	process.exit(0);
};
process.on('SIGTERM', stop);
process.on('SIGINT', stop);
console.log(`mail fake: SMTP ${smtpPort}, HTTP ${httpPort}, store ${dir}`);

/**
 * Runtime configuration, read from the process environment (the scripts write it to
 * $CROSSTALLY_DATA_DIR/crosstally.env). Plain `process.env` rather than `$env` so the worker,
 * the migrations and the batch scripts share this module with the app.
 */
const env = process.env;

function num(name: string, fallback: number): number {
	const v = env[name];
	if (v === undefined || v === '') return fallback;
	const n = Number(v);
	if (!Number.isFinite(n)) throw new Error(`${name} must be a number, got "${v}"`);
	return n;
}

/** The clinic's time zone (IANA name): "today", the default and latest test date, and every time shown. */
function timeZone(): string {
	const v = env.CLINIC_TIME_ZONE;
	const fallback = Intl.DateTimeFormat().resolvedOptions().timeZone || 'UTC';
	if (v === undefined || v === '') return fallback;
	try {
		new Intl.DateTimeFormat('en-US', { timeZone: v });
	} catch {
		throw new Error(`CLINIC_TIME_ZONE must be a time zone name such as Europe/Vienna, got "${v}"`);
	}
	return v;
}

export type Mode = 'demo' | 'test' | 'production';

export const config = {
	mode: (env.CROSSTALLY_MODE ?? 'demo') as Mode,
	dataDir: env.CROSSTALLY_DATA_DIR ?? '.data/demo',
	db: {
		host: env.DB_HOST ?? '127.0.0.1',
		port: num('DB_PORT', 3307),
		/**
		 * A Unix socket of a MariaDB on the same machine (the scripts' own server writes it into the env
		 * file). When set it is used instead of host and port: a round trip over the socket costs about a
		 * third less time and client CPU than loopback TCP (measured with the mariadb connector, README
		 * "Performance"). Empty or unset: TCP (a server elsewhere, or a cluster behind a load balancer).
		 */
		socket: env.DB_SOCKET || null,
		name: env.DB_NAME ?? 'crosstally',
		user: env.DB_USER ?? 'crosstally',
		password: env.DB_PASSWORD ?? '',
		pool: num('DB_POOL_MAX', 20)
	},
	redisUrl: env.REDIS_URL ?? 'redis://127.0.0.1:6380',
	smtpUrl: env.SMTP_URL ?? 'smtp://127.0.0.1:2525',
	mailFrom: env.MAIL_FROM ?? 'Crosstally <no-reply@crosstally.test>',
	/** HTTP API of the local mail fake; set only in demo and test mode. */
	mailFakeUrl: env.CROSSTALLY_MODE === 'production' ? null : (env.MAILFAKE_URL ?? null),
	origin: env.ORIGIN ?? 'http://localhost:3000',
	sessionIdleMinutes: num('SESSION_IDLE_MINUTES', 30),
	reminderIntervalMinutes: num('REMINDER_INTERVAL_MINUTES', 1440),
	escalateAfterReminders: num('ESCALATE_AFTER_REMINDERS', 3),
	/** Review e-mails: `full` (every discrepancy with its values) or `counts` (how many, and the link). */
	mailDetail: env.REVIEW_MAIL_DETAIL ?? 'full',
	/** Sign-in throttle (src/lib/server/throttle.ts). */
	signIn: {
		maxPerPair: num('SIGNIN_MAX_PER_PAIR', 5),
		maxPerAccount: num('SIGNIN_MAX_PER_ACCOUNT', 100),
		maxPerAddress: num('SIGNIN_MAX_PER_ADDRESS', 30),
		windowSeconds: num('SIGNIN_WINDOW_SECONDS', 900),
		knownSeconds: num('SIGNIN_KNOWN_SECONDS', 30 * 86_400)
	},
	uploadMaxBytes: num('UPLOAD_MAX_BYTES', 10 * 1024 * 1024),
	bcryptCost: num('BCRYPT_COST', 12),
	/** CLINIC_TIME_ZONE, default the server's own zone. */
	timeZone: timeZone()
};

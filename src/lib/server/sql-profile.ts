/**
 * Timing per SQL statement, for the benchmarks (bench:http prints where a transaction's time goes).
 * Off unless the process starts with CROSSTALLY_SQL_PROFILE=1 (then db() turns on Sequelize's
 * `benchmark` logging, which calls `recordStatement` with each statement's time), and even then only
 * between `startProfile()` and `takeProfile()`. Statements are grouped by verb and table.
 */
export const sqlProfileEnabled = () => process.env.CROSSTALLY_SQL_PROFILE === '1';

let active = false;
const samples = new Map<string, number[]>();
/** Each statement's interval (its answer's arrival, less its time): for the time each one added (see takeProfile). */
const spans: { key: string; start: number; end: number }[] = [];

/** "SELECT passes", "INSERT audit_events", "START TRANSACTION", "COMMIT" … */
export function statementKey(logged: string): string {
	const sql = logged
		.replace(/^Execut(?:ed|ing) \([^)]*\): /, '')
		.replace(/\s+/g, ' ')
		.trim();
	const verb = sql.split(' ')[0]?.toUpperCase() ?? '?';
	const table = (re: RegExp) => re.exec(sql)?.[1]?.replace(/`/g, '') ?? '?';
	if (verb === 'SELECT') return `SELECT ${table(/\bFROM\s+`?(\w+)/i)}${/FOR UPDATE/i.test(sql) ? ' FOR UPDATE' : ''}`;
	if (verb === 'INSERT') return `INSERT ${table(/^INSERT\s+(?:IGNORE\s+)?INTO\s+`?(\w+)/i)}`;
	if (verb === 'UPDATE') return `UPDATE ${table(/^UPDATE\s+`?(\w+)/i)}`;
	if (verb === 'DELETE') return `DELETE ${table(/\bFROM\s+`?(\w+)/i)}`;
	if (verb === 'START') return 'START TRANSACTION';
	if (verb === 'SET') return 'SET (isolation level)';
	return verb;
}

/** `end`: when the answer came (performance.now(); a parameter for the tests). */
export function recordStatement(logged: string, ms: number | undefined, end = performance.now()): void {
	if (!active || typeof ms !== 'number') return;
	const k = statementKey(logged);
	spans.push({ key: k, start: end - ms, end });
	const list = samples.get(k);
	if (list) list.push(ms);
	else samples.set(k, [ms]);
}

export function startProfile(): void {
	samples.clear();
	spans.length = 0;
	active = true;
}

export interface StatementFigures {
	statement: string;
	count: number;
	total_ms: number;
	mean_ms: number;
	p95_ms: number;
	/**
	 * The time this statement added with nothing else in flight: statements sent together (a pipeline, a
	 * Promise.all) overlap, so their own times (`total_ms`) add up to more than the wall. In the order the
	 * answers came, each is given the time from the previous answer (or its own start, if later) to its
	 * own. These add up to the time any statement was in flight; the rest of the wall is JavaScript and
	 * waiting with nothing sent. Meaningful when the profiled transactions run one at a time.
	 */
	added_ms: number;
}

/** The figures since startProfile(), largest total first; stops recording. */
export function takeProfile(): StatementFigures[] {
	active = false;
	const added = new Map<string, number>();
	let covered = -Infinity;
	for (const x of [...spans].sort((a, b) => a.end - b.end)) {
		added.set(x.key, (added.get(x.key) ?? 0) + Math.max(0, x.end - Math.max(x.start, covered)));
		covered = Math.max(covered, x.end);
	}
	spans.length = 0;
	const out: StatementFigures[] = [];
	for (const [statement, xs] of samples) {
		const s = [...xs].sort((a, b) => a - b);
		const total = s.reduce((n, x) => n + x, 0);
		out.push({
			statement,
			count: s.length,
			total_ms: Math.round(total * 10) / 10,
			mean_ms: Math.round((total / s.length) * 100) / 100,
			p95_ms: s[Math.min(s.length - 1, Math.floor(0.95 * s.length))],
			added_ms: Math.round((added.get(statement) ?? 0) * 10) / 10
		});
	}
	samples.clear();
	return out.sort((a, b) => b.added_ms - a.added_ms || b.total_ms - a.total_ms);
}

/**
 * Migration 00032: audit rows recorded before composites had a domain of their own (9ba9506) say
 * `unknown` for a composite's code; the migration files them under `_composites` ("Composites"), as
 * recordSubmission / recordResolution record them now, in every table that carries the domain. A
 * Tidewater protocol (two composites: Memory Index, Visuomotor Index; a slip carried into the Memory
 * Index, so there are errors on a composite) is recorded by the current code, then its composite rows
 * are put back the old way (`unknown`), and the migration's `up` is run on them, twice.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { closeDb, db, exec, select, selectOne } from '../../src/lib/server/db';
import { auditScreen } from '../../src/lib/server/audit-stats/screen';
import { NO_FILTERS } from '../../src/lib/server/audit-stats/filters';
import { up } from '../../db/migrations/00032-audit-composite-domain';
import { signedIn, ACCOUNTS } from '../helpers/http';
import { tidewaterProtocol, tidewaterCarriedSlip } from '../helpers/tidewater';
import { uniqueCode } from '../helpers/workflow';

/** The battery's composites (tests/helpers/tidewater.ts, db/seeds/profile.ts). */
const COMPOSITES = ['memory-index', 'visuomotor-index'];
/** The row-level tables, each with an order of its rows. */
const ROW_TABLES: Record<string, string> = { audit_fields: 'pass_id, test_code', agreement_pairs: 'id', error_events: 'id' };

let id = 0;
let battery = 0;

/** Every row of the protocol (and its battery's daily sums): table, code, domain, in one order. */
async function domains(): Promise<string[]> {
	const out: string[] = [];
	for (const [t, order] of Object.entries(ROW_TABLES)) {
		const rows = await select<{ test_code: string; domain: string }>(`SELECT test_code, domain FROM ${t} WHERE protocol_id = :id ORDER BY ${order}`, { id });
		out.push(...rows.map((r) => `${t} ${r.test_code} ${r.domain}`));
	}
	for (const t of ['audit_daily', 'audit_daily_delta']) {
		const rows = await select<{ test_code: string; domain: string }>(
			`SELECT test_code, domain FROM ${t} WHERE battery_id = :battery ORDER BY day, scorer_id, test_code, domain`,
			{ battery }
		);
		out.push(...rows.map((r) => `${t} ${r.test_code} ${r.domain}`));
	}
	return out;
}

const migrate = () => up({ name: '00032-audit-composite-domain', context: db().getQueryInterface() });

beforeAll(async () => {
	const c = { lead: await signedIn('lead'), first: await signedIn('scorer'), second: await signedIn('scorer2'), reviewer: await signedIn('reviewer') };
	const who = { first: ACCOUNTS.scorer, second: ACCOUNTS.scorer2, reviewer: ACCOUNTS.reviewer };
	id = await tidewaterProtocol(c, { ...who, code: uniqueCode('DB') }, { first: tidewaterCarriedSlip(), verify: true });
	battery = (await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'tidewater-profile'"))!.id;
}, 120_000);

afterAll(closeDb);

describe('migration 00032: the domain of composite rows recorded before composites had one', () => {
	it('files the old `unknown` rows of a composite under `_composites` and leaves every test row as it was', async () => {
		const recorded = await domains();
		// the current code's recording: composite rows in each row-level table, errors on the Memory Index among them
		for (const t of Object.keys(ROW_TABLES)) expect(recorded.filter((r) => r.startsWith(`${t} memory-index `)).length, t).toBeGreaterThan(0);
		expect(recorded.filter((r) => COMPOSITES.some((c) => r.includes(` ${c} `))).every((r) => r.endsWith(' _composites'))).toBe(true);

		// the rows as the code before 9ba9506 wrote them: a code that is not a test's → `unknown`
		for (const t of Object.keys(ROW_TABLES))
			await exec(`UPDATE ${t} SET domain = 'unknown' WHERE protocol_id = :id AND test_code IN (:codes)`, { id, codes: COMPOSITES });
		for (const t of ['audit_daily', 'audit_daily_delta'])
			await exec(`UPDATE ${t} SET domain = 'unknown' WHERE battery_id = :battery AND test_code IN (:codes)`, { battery, codes: COMPOSITES });
		const old = await domains();
		expect(old.filter((r) => r.endsWith(' unknown')).length).toBe(recorded.filter((r) => r.endsWith(' _composites')).length);
		const before = (await auditScreen({ ...NO_FILTERS, battery })).reports!.domains.map((d) => d.group_name);
		expect(before).toContain('unknown');

		await migrate();
		expect(await domains()).toEqual(recorded);
		const after = (await auditScreen({ ...NO_FILTERS, battery })).reports!.domains.map((d) => d.group_name);
		expect(after).toContain('Composites');
		expect(after).not.toContain('unknown');

		// again: nothing left to change
		await migrate();
		expect(await domains()).toEqual(recorded);
	});

	it('keeps `unknown` for a code the catalog does not know', async () => {
		const pass = await selectOne<{ id: number }>("SELECT id FROM passes WHERE protocol_id = :id AND which = 'first' ORDER BY round DESC LIMIT 1", { id });
		const code = `gone-${Date.now()}`;
		await exec(
			`INSERT INTO audit_fields (pass_id, test_code, protocol_id, round, which, scorer_id, battery_id, domain, fields_entered, raw_fields, derived_fields, entered_at)
			 SELECT :pass, :code, protocol_id, round, which, scorer_id, battery_id, 'unknown', 0, 0, 0, entered_at FROM audit_fields WHERE pass_id = :pass AND test_code = ''`,
			{ pass: pass!.id, code }
		);
		try {
			await migrate();
			expect(
				(await selectOne<{ domain: string }>('SELECT domain FROM audit_fields WHERE pass_id = :pass AND test_code = :code', { pass: pass!.id, code }))?.domain
			).toBe('unknown');
		} finally {
			await exec('DELETE FROM audit_fields WHERE pass_id = :pass AND test_code = :code', { pass: pass!.id, code });
		}
	});
});

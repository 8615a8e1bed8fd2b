/**
 * Issue 12, item 7: "today" and displayed times are the clinic's (CLINIC_TIME_ZONE), not the UTC
 * day. A second app instance runs with a zone whose calendar day differs from the UTC day right now,
 * and the New protocol form, the creation check and a displayed time are compared with dates worked
 * out by adding the zone's fixed offset to the clock by hand.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { Client, ACCOUNTS } from '../helpers/http';
import { startExtraApp } from '../helpers/services';
import { userId } from '../helpers/workflow';
import { selectOne, closeDb } from '../../src/lib/server/db';

// Both zones keep one offset all year (IANA tz database; no daylight saving time):
//   Pacific/Pago_Pago  UTC−11: before 11:00 UTC its calendar day is the previous UTC day;
//   Pacific/Kiritimati UTC+14: from 10:00 UTC its calendar day is the next UTC day.
const hourUtc = new Date().getUTCHours();
const ZONE = hourUtc < 10 ? { name: 'Pacific/Pago_Pago', hours: -11, label: 'GMT-11' } : { name: 'Pacific/Kiritimati', hours: 14, label: 'GMT+14' };
const shifted = (d: Date) => new Date(d.getTime() + ZONE.hours * 3_600_000);
const dayIn = (d: Date) => shifted(d).toISOString().slice(0, 10);
const addDays = (iso: string, n: number) => new Date(Date.parse(`${iso}T00:00:00Z`) + n * 86_400_000).toISOString().slice(0, 10);

const port = Number(process.env.PORT ?? 3010) + 200;
const base = `http://localhost:${port}`;
let app: Awaited<ReturnType<typeof startExtraApp>>;
let lead: Client, admin: Client;

beforeAll(async () => {
	app = await startExtraApp(port, { CLINIC_TIME_ZONE: ZONE.name, ORIGIN: base });
	lead = new Client(base);
	admin = new Client(base);
	expect(await lead.signIn(ACCOUNTS.lead)).toBe(true);
	expect(await admin.signIn(ACCOUNTS.admin)).toBe(true);
}, 40_000);
afterAll(async () => {
	await app?.stop();
	await closeDb();
});

describe(`clinic time zone ${ZONE.name}`, () => {
	it('the clinic day differs from the UTC day now (otherwise this test proves nothing)', () => {
		const now = new Date();
		expect(dayIn(now)).not.toBe(now.toISOString().slice(0, 10));
	});

	it('the New protocol form defaults to, and stops at, the clinic’s today and names the zone', async () => {
		const today = dayIn(new Date());
		const html = await (await lead.get('/protocols/new')).text();
		const input = html.match(/<input[^>]*id="testDate"[^>]*>/)![0];
		expect(input).toContain(`max="${today}"`);
		expect(input).toContain(`value="${today}"`);
		expect(html).toContain(`Today is ${today} (${ZONE.name})`);
	});

	it('creation accepts the clinic’s today and refuses the day after it', async () => {
		const today = dayIn(new Date());
		const battery = await selectOne<{ id: number }>("SELECT id FROM batteries WHERE code = 'brief-screen'");
		const fields = async (testDate: string) => ({
			code: `TZ-${Date.now().toString(36)}-${testDate}`.toUpperCase(),
			birthDate: '1988-05-17',
			educationYears: '14',
			batteryId: String(battery!.id),
			testDate,
			firstScorerId: String(await userId(ACCOUNTS.scorer)),
			secondScorerId: String(await userId(ACCOUNTS.scorer2)),
			reviewerId: String(await userId(ACCOUNTS.reviewer))
		});
		const tomorrow = addDays(today, 1);
		const refused = await lead.action('/protocols/new', await fields(tomorrow));
		expect(refused.body.status).toBe(400);
		expect(refused.body.data).toContain(`The test date ${tomorrow} is after today (${today})`);
		const ok = await lead.action('/protocols/new', await fields(today));
		expect(ok.body.type, JSON.stringify(ok.body)).toBe('redirect');
	});

	it('times are shown in the clinic’s zone with the zone written out', async () => {
		const at = (await selectOne<{ t: Date }>('SELECT last_sign_in_at AS t FROM users WHERE email = :e', { e: ACCOUNTS.admin }))!.t;
		const s = shifted(new Date(at)).toISOString(); // YYYY-MM-DDTHH:MM… of the clinic's wall clock
		const expected = `${s.slice(0, 10)} ${s.slice(11, 16)} ${ZONE.label}`;
		const html = await (await admin.get('/people')).text();
		expect(html).toContain(expected);
	});
});

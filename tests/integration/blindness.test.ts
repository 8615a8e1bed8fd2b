/**
 * The blind rule follows the assignment, not the roles held now (issue 12, item 10): an assigned
 * scorer of a protocol whose second pass is open sees nothing of the other pass — history values,
 * discrepancies, summary, and files the other scorer uploaded — after losing the scorer role, and
 * as an admin + lead + scorer who edits their own roles.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Client, signedIn, ACCOUNTS, DEMO_PASSWORD } from '../helpers/http';
import { createViaForm, correctScores, saveAndSubmit, userId } from '../helpers/workflow';
import { selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';
import { createUser } from '../../src/lib/server/users';

let lead: Client, admin: Client, sam: Client;
beforeAll(async () => {
	[lead, admin, sam] = await Promise.all([signedIn('lead'), signedIn('admin'), signedIn('scorer')]);
});
afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const RAWS = { 'speeded-match': 36, 'word-recall': 29, 'word-recall-delayed': 9, 'word-harvest': 21, 'switch-rule': 12 };
// A raw score only the first pass holds, and a file name only the first scorer uploads.
const MARKER_RAW = '47';
/** The marker as a raw score in page data: `"raw":"47"`, or escaped inside a JSON string. */
const MARKER_IN_DATA = new RegExp(`\\\\*"raw\\\\*":\\\\*"${MARKER_RAW}\\\\*"`);
const png = new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13, 73, 72, 68, 82]);

async function upload(c: Client, id: number, name: string) {
	const fd = new FormData();
	fd.append('file', new File([png], name));
	const res = await c.request(`/protocols/${id}?/upload`, { method: 'POST', body: fd, headers: { 'x-sveltekit-action': 'true', accept: 'application/json' } });
	return (await res.json()) as { type: string };
}

/** Sam submits the first pass (with the marker) and uploads a scan; the second pass stays open. */
async function firstPassIn(second: string, secondClient: Client) {
	const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second, reviewer: ACCOUNTS.reviewer });
	const scores = await correctScores(id, RAWS);
	scores['switch-rule'].raw = MARKER_RAW;
	expect((await saveAndSubmit(sam, id, scores)).body.status).toBe('awaiting_second');
	expect((await upload(sam, id, 'first-scorer-notes.png')).type).toBe('success');
	const samsFile = (await selectOne<{ id: number }>('SELECT id FROM attachments WHERE protocol_id = :id', { id }))!.id;
	// the second scorer's own upload stays visible to them
	expect((await upload(secondClient, id, 'second-scorer-notes.png')).type).toBe('success');
	return { id, samsFile };
}

/** Everything the second scorer can reach of the protocol shows nothing of the first pass. */
async function seesNothingOfTheFirstPass(c: Client, id: number, samsFile: number) {
	const page = await c.get(`/protocols/${id}`);
	expect(page.status).toBe(200);
	const html = await page.text();
	expect(html).not.toContain('first-scorer-notes.png');
	expect(html).toContain('second-scorer-notes.png');
	// the page's data (what the browser receives), the history's submit_first entry in particular
	const data = await (await c.get(`/protocols/${id}/__data.json`)).text();
	expect(data).toContain('submit_first');
	expect(data).not.toContain('first-scorer-notes.png');
	expect(data).not.toMatch(MARKER_IN_DATA);
	expect(data).not.toMatch(/\\*"scores\\*"/); // no pass values at all in the history
	// the file itself: the same 404 as a file that does not exist
	expect((await c.get(`/protocols/${id}/attachments/${samsFile}`)).status).toBe(404);
	// review (discrepancies) and summary: closed while the second pass is open
	for (const path of [`/protocols/${id}/review`, `/protocols/${id}/summary`, `/protocols/${id}/summary.csv`]) {
		const r = await c.get(path);
		expect(r.status, path).not.toBe(200);
		expect(await r.text(), path).not.toContain(`"${MARKER_RAW}"`);
	}
	// their own pass only
	const pass = await (await c.get(`/api/v1/protocols/${id}/pass`)).json();
	expect(JSON.stringify(pass)).not.toContain(`"${MARKER_RAW}"`);
}

describe('blindness follows the assignment (item 10)', () => {
	it('a second scorer who loses the scorer role (and keeps lead) sees nothing of the first pass', async () => {
		const email = `second-${Date.now()}@clinic.test`;
		const id0 = await createUser({ email, name: 'Second Lead-Scorer', roles: ['scorer', 'lead'], password: DEMO_PASSWORD }, null);
		const second = new Client();
		expect(await second.signIn(email)).toBe(true);
		const { id, samsFile } = await firstPassIn(email, second);
		// the admin takes the scorer role away; the assignment stays
		const r = await admin.action('/people?/roles', { id: String(id0), roles: ['lead'] });
		expect(r.body.type, JSON.stringify(r.body)).toBe('success');
		expect((await (await second.get('/api/v1/me')).json()).roles).toEqual(['lead']);
		await seesNothingOfTheFirstPass(second, id, samsFile);
		// a lead who is not a scorer of it sees the history's values (the rule is about the assignment)
		const leadData = await (await lead.get(`/protocols/${id}/__data.json`)).text();
		expect(leadData).toContain('first-scorer-notes.png');
		expect(leadData).toMatch(MARKER_IN_DATA);
	}, 90_000);

	it('an admin + lead + scorer assigned as second scorer who drops their own scorer role sees nothing either', async () => {
		const email = `allroles-${Date.now()}@clinic.test`;
		const me = await createUser({ email, name: 'All Roles', roles: ['admin', 'lead', 'scorer'], password: DEMO_PASSWORD }, null);
		const second = new Client();
		expect(await second.signIn(email)).toBe(true);
		const { id, samsFile } = await firstPassIn(email, second);
		// before and after editing their own roles
		await seesNothingOfTheFirstPass(second, id, samsFile);
		const r = await second.action('/people?/roles', { id: String(me), roles: ['admin', 'lead'] });
		expect(r.body.type, JSON.stringify(r.body)).toBe('success');
		await seesNothingOfTheFirstPass(second, id, samsFile);
		expect(await userId(email)).toBe(me);
	}, 90_000);

	it('the first scorer does not see the second scorer’s upload either, until both passes are in', async () => {
		const email = `plain-${Date.now()}@clinic.test`;
		await createUser({ email, name: 'Plain Second', roles: ['scorer'], password: DEMO_PASSWORD }, null);
		const second = new Client();
		expect(await second.signIn(email)).toBe(true);
		const id = await createViaForm(lead, { first: ACCOUNTS.scorer, second: email, reviewer: ACCOUNTS.reviewer });
		expect((await upload(second, id, 'second-only.png')).type).toBe('success');
		const file = (await selectOne<{ id: number }>('SELECT id FROM attachments WHERE protocol_id = :id', { id }))!.id;
		expect(await (await sam.get(`/protocols/${id}`)).text()).not.toContain('second-only.png');
		expect((await sam.get(`/protocols/${id}/attachments/${file}`)).status).toBe(404);
		// both passes in: no longer blind, the file is there for both
		const scores = await correctScores(id, RAWS);
		expect((await saveAndSubmit(sam, id, scores)).status).toBe(200);
		expect((await saveAndSubmit(second, id, scores)).status).toBe(200);
		expect(await (await sam.get(`/protocols/${id}`)).text()).toContain('second-only.png');
		expect((await sam.get(`/protocols/${id}/attachments/${file}`)).status).toBe(200);
	}, 90_000);
});

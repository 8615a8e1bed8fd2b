/**
 * The e-mail to leads when a scorer is put back on full double entry (risk-based verification,
 * ../verification). Written to the outbox in the transaction that changed the scorer's standing;
 * rendered by the worker. Names the scorer and the battery; a protocol only by its pseudonymous code.
 */
import { selectOne } from '../db';
import { config } from '../config';
import { renderers } from './deliver';
import { esc, layout, button } from './templates';
import { usersWithRole } from '../users';

renderers.verification_full = async (p) => {
	const leads = await usersWithRole('lead');
	if (leads.length === 0) return null;
	const scorer = await selectOne<{ name: string }>('SELECT name FROM users WHERE id = :id', { id: Number(p.scorerId) });
	const battery = await selectOne<{ name: string }>('SELECT name FROM batteries WHERE id = :id', { id: Number(p.batteryId) });
	const who = scorer?.name ?? `scorer #${p.scorerId}`;
	const what = battery?.name ?? `battery #${p.batteryId}`;
	const subject = `Back to full double entry: ${who} (${what})`;
	const link = `${config.origin}/audit/verification`;
	const text = `${who} is back on full double entry for ${what}: every protocol they enter now gets a second pass.

Why: ${String(p.reason ?? '')}

They qualify for sampling again after a fresh record of double-entered work (see the battery's policy).
Risk-based verification on the Audit screen: ${link}`;
	const html = layout(
		subject,
		`<p><strong>${esc(who)}</strong> is back on full double entry for <strong>${esc(what)}</strong>: every protocol they enter now gets a second pass.</p>
<p>Why: ${esc(p.reason)}</p><p style="color:#4a5563">They qualify for sampling again after a fresh record of double-entered work (see the battery's policy).</p>${button(link, 'Open risk-based verification')}`
	);
	return { to: leads.map((l) => l.email), subject, text, html };
};

export {};

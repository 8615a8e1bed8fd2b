/**
 * The e-mail to leads when a scorer is put back on full double entry (risk-based verification,
 * ../verification). Written to the outbox in the transaction that changed the scorer's standing;
 * rendered by the worker (HTML: ./VerificationMail.svelte). Names the scorer and the battery; a
 * protocol only by its pseudonymous code.
 */
import { config } from '../config';
import { readRetried } from '../db';
import { models } from '../models';
import { renderers } from './deliver';
import { mailDocument } from './document';
import VerificationMail from './VerificationMail.svelte';
import { usersWithRole } from '../users';

renderers.verification_full = async (p) => {
	const leads = await usersWithRole('lead');
	if (leads.length === 0) return null;
	const { User, Battery } = models();
	const [scorer, battery] = await Promise.all([
		readRetried(() => User.findByPk(Number(p.scorerId), { attributes: ['name'] })),
		readRetried(() => Battery.findByPk(Number(p.batteryId), { attributes: ['name'] }))
	]);
	const who = scorer?.name ?? `scorer #${p.scorerId}`;
	const what = battery?.name ?? `battery #${p.batteryId}`;
	const reason = String(p.reason ?? '');
	const subject = `Back to full double entry: ${who} (${what})`;
	const link = `${config.origin}/audit/verification`;
	const text = `${who} is back on full double entry for ${what}: every protocol they enter now gets a second pass.

Why: ${reason}

They qualify for sampling again after a fresh record of double-entered work (see the battery's policy).
Risk-based verification on the Audit screen: ${link}`;
	const html = mailDocument(VerificationMail, { subject, who, what, reason, link });
	return { to: leads.map((l) => l.email), subject, text, html };
};

export {};

/**
 * What the protocol page shows, in one call for its load: the view, the history, the e-mails about it,
 * the age warnings and the people a lead may assign (leads and reviewers only), the amendments.
 */
import { protocolView, protocolHistoryFor, planGroups, type Actor } from './service';
import { protocolAmendments } from './amendments';
import { models } from '../models';
import { reading } from '../models/protocol';
import { usersWithRole } from '../users';
import { listProtocolMail } from '../mail/reminders/history';

export async function protocolPage(id: number, user: Actor) {
	const view = await protocolView(id, user);
	const history = await protocolHistoryFor(id, user);
	const isLead = view.duties.includes('lead');
	const staff = isLead || view.duties.includes('reviewer');
	const mail = view.protocol.status === 'in_review' || view.protocol.status === 'verified' ? await listProtocolMail(id) : [];
	let warnings: string[] = [];
	if (staff) {
		const ex = await reading(null, () => models().Examinee.findByPk(view.protocol.examinee_id, { raw: true }));
		const plan = await planGroups(
			view.protocol.battery_id,
			view.protocol.norm_set_id,
			{ birthDate: ex!.birth_date, sex: ex!.sex, educationYears: ex!.education_years },
			view.protocol.test_date
		).catch(() => null);
		warnings = [...new Set((plan?.plan ?? []).flatMap((x) => x.warnings.map((w) => w.message)))];
	}
	const people = isLead
		? {
				scorers: (await usersWithRole('scorer')).map((u) => ({ id: u.id, name: u.name })),
				reviewers: (await usersWithRole('reviewer')).map((u) => ({ id: u.id, name: u.name }))
			}
		: null;
	const amendments = staff ? await protocolAmendments(id) : [];
	return { view, history, mail, warnings, people, amendments };
}

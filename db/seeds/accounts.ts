/** Demo and test accounts, one or more per role. Invented people of an invented clinic. */
import { createUser, hashPassword } from '../../src/lib/server/users';
import { exec } from '../../src/lib/server/db';
import type { Role } from '../../src/lib/roles';

export const DEMO_PASSWORD = 'crosstally-demo';

export const ACCOUNTS: { email: string; name: string; roles: Role[] }[] = [
	{ email: 'sam.scorer@demo.crosstally.test', name: 'Sam Okafor', roles: ['scorer'] },
	{ email: 'rae.scorer@demo.crosstally.test', name: 'Rae Lindqvist', roles: ['scorer'] },
	{ email: 'kit.scorer@demo.crosstally.test', name: 'Kit Moreau', roles: ['scorer'] },
	{ email: 'rita.reviewer@demo.crosstally.test', name: 'Rita Castellanos', roles: ['reviewer'] },
	{ email: 'lee.lead@demo.crosstally.test', name: 'Lee Nakamura', roles: ['lead', 'reviewer'] },
	{ email: 'ada.admin@demo.crosstally.test', name: 'Ada Brennan', roles: ['admin'] }
];

export async function seedAccounts(): Promise<void> {
	const hash = await hashPassword(DEMO_PASSWORD);
	for (const a of ACCOUNTS) {
		const id = await createUser(a, null);
		await exec('UPDATE users SET password_hash = :hash WHERE id = :id', { hash, id });
	}
}

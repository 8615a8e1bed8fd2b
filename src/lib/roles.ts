/** Roles and the screens each role sees. Client-safe: the navigation is built from this. */
export const ROLES = ['scorer', 'reviewer', 'lead', 'admin'] as const;
export type Role = (typeof ROLES)[number];

export const ROLE_LABELS: Record<Role, string> = {
	scorer: 'Scorer',
	reviewer: 'Reviewer',
	lead: 'Lead',
	admin: 'Administrator'
};

export function parseRoles(value: string | null | undefined): Role[] {
	if (!value) return [];
	return value
		.split(',')
		.map((r) => r.trim())
		.filter((r): r is Role => (ROLES as readonly string[]).includes(r));
}

export function hasRole(roles: readonly string[] | undefined, ...wanted: Role[]): boolean {
	return !!roles && wanted.some((r) => roles.includes(r));
}

export interface NavItem {
	href: string;
	label: string;
	roles: Role[] | 'all';
	icon: string;
	demoOnly?: boolean;
}

export const NAV: NavItem[] = [
	{ href: '/', label: 'Worklist', roles: 'all', icon: 'list' },
	{ href: '/protocols', label: 'Protocols', roles: ['scorer', 'reviewer', 'lead'], icon: 'file' },
	{ href: '/audit', label: 'Audit', roles: ['lead'], icon: 'chart' },
	{ href: '/catalog', label: 'Catalog', roles: ['lead', 'admin'], icon: 'book' },
	{ href: '/people', label: 'People', roles: ['admin'], icon: 'users' },
	{ href: '/mailbox', label: 'Mailbox', roles: ['admin'], icon: 'mail', demoOnly: true },
	{ href: '/settings', label: 'Settings', roles: ['admin'], icon: 'gear' }
];

export function navFor(roles: readonly string[], mailFake: boolean): NavItem[] {
	return NAV.filter((n) => (n.roles === 'all' || n.roles.some((r) => roles.includes(r))) && (!n.demoOnly || mailFake));
}

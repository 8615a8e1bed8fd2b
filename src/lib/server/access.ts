/**
 * Who may open what: the one table of access rules, keyed by SvelteKit route id and HTTP method.
 * hooks.server.ts checks every request against it before any load, action or endpoint runs; a
 * route with no entry is refused (and tests/integration/access.test.ts fails for it). Object-level
 * checks — is this scorer assigned to this protocol, is the pass blind — live in the services and
 * are called by the route through `guard.ts`.
 *
 *   'public'     anyone, signed in or not
 *   'signed-in'  any active account
 *   Role[]       an account holding at least one of the roles
 */
import type { Role } from '../roles';

export type Rule = 'public' | 'signed-in' | Role[];
/** Per method; `*` applies to every method not listed. Page form actions are POST. */
export type RouteRules = Partial<Record<'GET' | 'POST' | 'PUT' | 'PATCH' | 'DELETE' | '*', Rule>>;

const lead: Role[] = ['lead'];
const leadAdmin: Role[] = ['lead', 'admin'];
const admin: Role[] = ['admin'];
const staff: Role[] = ['scorer', 'reviewer', 'lead'];

export const ACCESS: Record<string, RouteRules> = {
	// Foundation
	'/health': { GET: 'public' },
	'/signin': { '*': 'public' },
	'/signout': { POST: 'public', GET: 'public' },
	'/forgot': { '*': 'public' },
	'/set-password/[token]': { '*': 'public' },
	'/': { GET: 'signed-in' },
	'/people': { '*': admin },
	'/mailbox': { GET: admin },
	'/mailbox/[id]': { GET: admin },
	// service settings (review e-mail: reminder interval, escalation, detail); POST is the save action
	'/settings': { GET: admin, POST: admin },
	'/api/v1/me': { GET: 'signed-in' },

	// Catalog
	'/catalog': { GET: leadAdmin },
	'/catalog/tests': { GET: leadAdmin, POST: lead },
	'/catalog/tests/[code]': { GET: leadAdmin, POST: lead },
	'/catalog/batteries': { GET: leadAdmin, POST: lead },
	'/catalog/batteries/[id]': { GET: leadAdmin, POST: lead },
	'/catalog/norm-sets': { GET: leadAdmin, POST: lead },
	'/catalog/norm-sets/[id]': { GET: leadAdmin, POST: lead },
	'/catalog/import': { GET: leadAdmin }, // the upload posts to /api/v1/catalog/import/*
	'/catalog/export/[kind]': { GET: leadAdmin },
	'/api/v1/tests': { GET: 'signed-in', POST: lead },
	'/api/v1/tests/[code]': { GET: 'signed-in', PUT: lead },
	'/api/v1/batteries': { GET: 'signed-in', POST: lead },
	'/api/v1/batteries/[id]': { GET: 'signed-in', PUT: lead },
	'/api/v1/norm-sets': { GET: 'signed-in', POST: lead },
	'/api/v1/norm-sets/[id]': { GET: 'signed-in', PUT: lead },
	'/api/v1/norm-sets/[id]/groups': { POST: lead },
	'/api/v1/catalog/import/preview': { POST: lead },
	'/api/v1/catalog/import/confirm': { POST: lead },

	// Protocols and the double-entry workflow (object checks in the services)
	'/protocols': { GET: staff },
	'/protocols/new': { GET: lead, POST: lead },
	// POST: form actions (upload: any duty; reassign, reopen, norm-group change: leads — checked in the action)
	'/protocols/[id]': { GET: staff, POST: staff },
	'/protocols/[id]/entry': { GET: ['scorer'] },
	'/protocols/[id]/review': { GET: ['reviewer', 'lead'] },
	'/protocols/[id]/summary': { GET: ['reviewer', 'lead'] },
	'/protocols/[id]/summary.csv': { GET: ['reviewer', 'lead'] },
	'/protocols/[id]/summary.docx': { GET: ['reviewer', 'lead'] },
	'/protocols/[id]/attachments/[attachmentId]': { GET: ['reviewer', 'lead', 'scorer'] },
	'/api/v1/worklist': { GET: 'signed-in' },
	'/api/v1/protocols/[id]/pass': { GET: ['scorer'], PUT: ['scorer'], POST: ['scorer'] },
	'/api/v1/protocols/[id]/signoff': { POST: ['reviewer'] },
	'/api/v1/discrepancies/[id]': { PATCH: ['reviewer'] },
	// amendment of a verified protocol: a lead's applies, a reviewer's is a request; a lead decides requests
	'/api/v1/protocols/[id]/amendments': { POST: ['lead', 'reviewer'] },
	'/api/v1/amendments/[id]': { POST: lead },

	// Audit
	'/audit': { GET: lead },
	'/api/v1/audit/[report]': { GET: lead },
	// risk-based verification: per-scorer standing and risk; POST ?/policy sets a battery's policy
	'/audit/verification': { GET: lead, POST: lead }
};

export function ruleFor(routeId: string, method: string): Rule | undefined {
	const rules = ACCESS[routeId];
	if (!rules) return undefined;
	const m = method === 'HEAD' ? 'GET' : method;
	return rules[m as keyof RouteRules] ?? rules['*'];
}

export type Decision = 'allow' | 'anonymous' | 'forbidden' | 'unknown-route';

export function decide(routeId: string, method: string, roles: readonly string[] | null): Decision {
	const rule = ruleFor(routeId, method);
	if (!rule) return 'unknown-route';
	if (rule === 'public') return 'allow';
	if (!roles) return 'anonymous';
	if (rule === 'signed-in') return 'allow';
	return rule.some((r) => roles.includes(r)) ? 'allow' : 'forbidden';
}

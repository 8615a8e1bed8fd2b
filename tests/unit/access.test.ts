import { describe, it, expect } from 'vitest';
import { decide, ruleFor } from '../../src/lib/server/access';
import { navFor } from '../../src/lib/roles';

describe('access table', () => {
	it('refuses a route that has no entry', () => {
		expect(decide('/no/such/route', 'GET', ['admin'])).toBe('unknown-route');
	});
	it('sends anonymous users to sign-in and refuses wrong roles', () => {
		expect(decide('/people', 'GET', null)).toBe('anonymous');
		expect(decide('/people', 'GET', ['scorer', 'lead'])).toBe('forbidden');
		expect(decide('/people', 'POST', ['admin'])).toBe('allow');
		expect(decide('/signin', 'POST', null)).toBe('allow');
	});
	it('distinguishes methods: catalog reads for any signed-in role, writes for leads', () => {
		expect(decide('/api/v1/tests', 'GET', ['scorer'])).toBe('allow');
		expect(decide('/api/v1/tests', 'POST', ['scorer'])).toBe('forbidden');
		expect(decide('/api/v1/tests', 'POST', ['lead'])).toBe('allow');
		expect(ruleFor('/api/v1/tests', 'HEAD')).toBe('signed-in');
		expect(decide('/api/v1/tests', 'DELETE', ['lead'])).toBe('unknown-route');
	});
	it('navigation shows each role only its screens', () => {
		const hrefs = (roles: string[], fake = true) => navFor(roles, fake).map((n) => n.href);
		expect(hrefs(['scorer'])).toEqual(['/', '/protocols']);
		expect(hrefs(['admin'])).toEqual(['/', '/catalog', '/people', '/mailbox', '/settings']);
		expect(hrefs(['admin'], false)).toEqual(['/', '/catalog', '/people', '/settings']);
		expect(hrefs(['lead'])).toEqual(['/', '/protocols', '/audit', '/catalog']);
	});
});

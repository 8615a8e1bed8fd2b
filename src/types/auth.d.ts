import type { DefaultSession } from '@auth/sveltekit';

declare module '@auth/sveltekit' {
	interface Session {
		user: { id: string; uid: number; roles: string[]; sv: number } & DefaultSession['user'];
	}
}

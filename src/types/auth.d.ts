import type { DefaultSession } from '@auth/sveltekit';

declare module '@auth/sveltekit' {
	interface Session {
		user: {
			id: string;
			uid: number;
			roles: string[];
			sv: number;
			/** false when Redis could not be asked whether the session was ended */ checked?: boolean;
		} & DefaultSession['user'];
	}
}

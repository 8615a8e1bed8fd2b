// See https://svelte.dev/docs/kit/types#app.d.ts
import type { Role } from '$lib/roles';

declare global {
	namespace App {
		interface Locals {
			user: { id: number; name: string; email: string; roles: Role[] } | null;
			/** Set by handleError when the database could not be reached (answered 503). */
			unavailable?: boolean;
		}
		interface Error {
			message: string;
			code?: string;
		}
		// interface PageData {}
		// interface PageState {}
		// interface Platform {}
	}
}

export {};

declare module '*.html?raw' {
	const content: string;
	export default content;
}

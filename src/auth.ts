/**
 * Sign-in: Auth.js with the Credentials provider, bcrypt password hashes, JWT sessions that carry
 * the user's id, roles and session version. The session expires after SESSION_IDLE_MINUTES without
 * a request; deactivation and password changes bump the session version (checked in hooks).
 */
import { SvelteKitAuth, CredentialsSignin } from '@auth/sveltekit';
import Credentials from '@auth/sveltekit/providers/credentials';
import { config } from '$lib/server/config';
import { verifyCredentials } from '$lib/server/users';
import { signInThrottle } from '$lib/server/throttle';
import { signInSchema } from '$lib/validation/auth';

class Throttled extends CredentialsSignin {
	code = 'throttled';
}
class Unavailable extends CredentialsSignin {
	code = 'unavailable';
}

const idleMs = () => config.sessionIdleMinutes * 60_000;

export const { handle, signIn, signOut } = SvelteKitAuth(async (event) => ({
	trustHost: true,
	secret: process.env.AUTH_SECRET,
	basePath: '/auth',
	pages: { signIn: '/signin', error: '/signin' },
	// Short log lines: a refused sign-in is routine, and nothing secret is ever logged.
	logger: {
		error: (e: Error) => {
			if (e instanceof CredentialsSignin) console.warn(`[auth] sign-in refused (${(e as CredentialsSignin).code})`);
			else console.error(`[auth] ${e.name}: ${e.message}`);
		},
		warn: () => undefined,
		debug: () => undefined
	},
	session: { strategy: 'jwt', maxAge: config.sessionIdleMinutes * 60 },
	providers: [
		Credentials({
			credentials: { email: { label: 'E-mail' }, password: { label: 'Password', type: 'password' } },
			async authorize(raw) {
				const parsed = signInSchema.safeParse(raw);
				if (!parsed.success) return null;
				const { email, password } = parsed.data;
				let address = 'unknown';
				try {
					address = event.getClientAddress();
				} catch {
					/* not available in some contexts */
				}
				const throttle = signInThrottle();
				try {
					if (await throttle.isBlocked(email, address)) throw new Throttled();
				} catch (e) {
					if (e instanceof Throttled) throw e;
					// Redis down: fail closed for sign-in rather than allow unthrottled guessing.
					throw new Unavailable();
				}
				let user;
				try {
					user = await verifyCredentials(email, password);
				} catch {
					throw new Unavailable();
				}
				if (!user) {
					await throttle.recordFailure(email, address).catch(() => undefined);
					return null;
				}
				await throttle.reset(email).catch(() => undefined);
				return { id: String(user.id), name: user.name, email: user.email, roles: user.roles, sv: user.session_version };
			}
		})
	],
	callbacks: {
		// Where to go after sign-in: Auth.js's default rule, plus a target holding control characters
		// (CR, LF, tab…) falls back to the start page instead of failing as a header (a 500).
		async redirect({ url, baseUrl }) {
			if (/[\u0000-\u001f\u007f]/.test(url)) return baseUrl;
			if (url.startsWith('/')) return `${baseUrl}${url}`;
			try {
				return new URL(url).origin === baseUrl ? url : baseUrl;
			} catch {
				return baseUrl;
			}
		},
		async jwt({ token, user }) {
			const now = Date.now();
			if (user) {
				const u = user as { id: string; roles: string[]; sv: number };
				token.uid = Number(u.id);
				token.roles = u.roles;
				token.sv = u.sv;
				token.seen = now;
				return token;
			}
			// Inactivity logoff: a token not used for the idle period is no longer a session.
			if (typeof token.seen !== 'number' || now - token.seen > idleMs()) return null;
			token.seen = now;
			return token;
		},
		async session({ session, token }) {
			return {
				...session,
				user: { ...session.user, id: String(token.uid), uid: token.uid as number, roles: (token.roles as string[]) ?? [], sv: token.sv as number }
			};
		}
	}
}));

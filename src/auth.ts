/**
 * Sign-in: Auth.js with the Credentials provider, bcrypt password hashes, JWT sessions that carry
 * the user's id, roles and session version. The session expires after SESSION_IDLE_MINUTES without
 * a request; deactivation and password changes bump the session version (checked in hooks).
 */
import { SvelteKitAuth, CredentialsSignin } from '@auth/sveltekit';
import Credentials from '@auth/sveltekit/providers/credentials';
import { config } from '$lib/server/config';
import { verifyCredentials, endAllSessions } from '$lib/server/users';
import { newSession, revokeSession, sessionState } from '$lib/server/revocation';
import { authRedirect } from '$lib/server/redirect';
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
				// Check and count in one step (src/lib/server/throttle.ts); Redis down: refuse sign-in
				// rather than allow unthrottled guessing.
				let verdict;
				try {
					verdict = await throttle.reserve(email, address);
				} catch {
					throw new Unavailable();
				}
				if (!verdict.ok) throw new Throttled();
				let user;
				try {
					user = await verifyCredentials(email, password);
				} catch {
					await throttle.release(email, address, verdict.known).catch(() => undefined);
					throw new Unavailable();
				}
				if (!user) return null; // the failure was counted by reserve()
				await throttle.succeeded(email, address, verdict.known).catch(() => undefined);
				let ids;
				try {
					ids = await newSession();
				} catch {
					throw new Unavailable();
				}
				return { id: String(user.id), name: user.name, email: user.email, roles: user.roles, sv: user.session_version, ...ids };
			}
		})
	],
	events: {
		// Sign-out ends the session on every app server (src/lib/server/revocation.ts). Without Redis,
		// all of this user's sessions are ended instead (the session version), never none of them.
		async signOut(message) {
			const token = 'token' in message ? message.token : null;
			if (!token) return;
			try {
				if (typeof token.sid !== 'string') throw new Error('token without a session id');
				await revokeSession(token.sid);
			} catch {
				if (typeof token.uid === 'number') await endAllSessions(token.uid);
			}
		}
	},
	callbacks: {
		// Only paths of this site are followed after sign-in (no open redirect).
		redirect: authRedirect,
		async jwt({ token, user }) {
			const now = Date.now();
			if (user) {
				const u = user as { id: string; roles: string[]; sv: number; sid: string; ep: string };
				token.uid = Number(u.id);
				token.roles = u.roles;
				token.sv = u.sv;
				token.sid = u.sid;
				token.ep = u.ep;
				token.seen = now;
				token.rc = true;
				return token;
			}
			// Inactivity logoff: a token not verified for the idle period is no longer a session.
			if (typeof token.seen !== 'number' || now - token.seen > idleMs()) return null;
			const state = await sessionState(token.sid, token.ep);
			if (state === 'revoked') return null; // signed out (or from before a lost deny-list)
			// Redis unreachable: not verified, so not refreshed (`seen` stays); the request is refused.
			token.rc = state === 'ok';
			if (state === 'ok') token.seen = now;
			return token;
		},
		async session({ session, token }) {
			return {
				...session,
				user: {
					...session.user,
					id: String(token.uid),
					uid: token.uid as number,
					roles: (token.roles as string[]) ?? [],
					sv: token.sv as number,
					checked: token.rc !== false
				}
			};
		}
	}
}));

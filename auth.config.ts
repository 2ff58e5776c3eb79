import Credentials from '@auth/core/providers/credentials';
import { CredentialsSignin } from '@auth/core/errors';
import { defineConfig } from 'auth-astro';
import { authenticate, endSession, startSession } from './src/lib/server/users';
import { safeNextPath } from './src/lib/shared/safe-redirect';

class RateLimited extends CredentialsSignin {
  code = 'rate_limited';
}

// Set by src/middleware.ts from the socket (or, with TRUST_PROXY, the forwarded address); any value the
// client sent under this name has been overwritten there.
const clientAddress = (request: Request) => request.headers.get('x-offsetry-client-address') || 'unknown';

// AUTH_SECRET is read from the runtime environment, never from the build-time .env, so it is not baked
// into dist/ (see stack-notes).
export default defineConfig({
  secret: process.env.AUTH_SECRET,
  trustHost: true,
  useSecureCookies: process.env.OFFSETRY_MODE === 'production' && process.env.OFFSETRY_INSECURE_COOKIES !== 'true',
  session: { strategy: 'jwt', maxAge: 10 * 60 * 60 },
  pages: { signIn: '/signin', error: '/signin' },
  providers: [
    Credentials({
      credentials: { email: { label: 'E-mail', type: 'email' }, password: { label: 'Password', type: 'password' } },
      async authorize(credentials, request) {
        const email = typeof credentials?.email === 'string' ? credentials.email : '';
        const password = typeof credentials?.password === 'string' ? credentials.password : '';
        if (!email || !password || email.length > 200 || password.length > 200) return null;
        const result = await authenticate(email, password, clientAddress(request));
        if (!result.ok) {
          if (result.reason === 'rate-limited') throw new RateLimited();
          return null;
        }
        // A server-side session row: the cookie names it, every request checks it, sign-out ends it.
        const sid = await startSession(result.user.id);
        return { id: result.user.id, email: result.user.email, name: result.user.name, roles: result.user.roles, sid };
      },
    }),
  ],
  callbacks: {
    // After sign-in or sign-out Auth.js follows callbackUrl: only to a path on this origin.
    redirect({ url, baseUrl }) {
      const origin = new URL(baseUrl).origin;
      const path = url.startsWith(origin + '/') ? url.slice(origin.length) : url;
      return origin + safeNextPath(path);
    },
    jwt({ token, user }) {
      if (user) {
        token.uid = user.id;
        token.roles = (user as { roles?: string[] }).roles ?? [];
        token.sid = (user as { sid?: string }).sid;
      }
      return token;
    },
    session({ session, token }) {
      const u = session.user as unknown as Record<string, unknown>;
      u.id = token.uid;
      u.roles = token.roles;
      u.sid = token.sid;
      return session;
    },
  },
  events: {
    async signOut(message) {
      const sid = 'token' in message ? (message.token?.sid as string | undefined) : undefined;
      if (sid) await endSession(sid, 'sign-out');
    },
  },
});

/**
 * next-auth configuration: one credentials provider (email + password), JWT sessions that
 * carry only the user id and expire after `sessionMaxAgeSeconds` (8 h by default, not
 * extended by activity), our own sign-in page, audit of sign-out.
 *
 * The token is an encrypted JWT (next-auth's default A256GCM JWE keyed from the secret), so a
 * tampered or foreign cookie fails to decrypt and the request is treated as signed out. The
 * token is only an identity claim: every action re-reads the user and their membership from
 * the database (lib/server/authz/define.ts), so removal and role changes apply at once.
 */
import type { NextAuthOptions, Session } from 'next-auth';
import CredentialsProvider from 'next-auth/providers/credentials';
import { authSettings } from './config';
import { authenticateCredentials, SIGN_IN_ERRORS } from './sign-in';
import { recordAudit } from './audit';
import { clientAddressFromForwardedFor } from './address';
import { db } from '../db';

declare module 'next-auth' {
  interface Session {
    /** The signed-in user's id; nothing else about the user travels in the session. */
    userId?: string;
  }
}

let cached: NextAuthOptions | null = null;

function headerValue(headers: unknown, name: string): string | null {
  if (!headers || typeof headers !== 'object') return null;
  if (headers instanceof Headers) return headers.get(name);
  const v = (headers as Record<string, unknown>)[name];
  if (typeof v === 'string') return v;
  if (Array.isArray(v) && typeof v[0] === 'string') return v.join(', ');
  return null;
}

export function authOptions(): NextAuthOptions {
  if (cached) return cached;
  const settings = authSettings();
  cached = {
    secret: settings.secret,
    session: { strategy: 'jwt', maxAge: settings.sessionMaxAgeSeconds, updateAge: settings.sessionMaxAgeSeconds },
    jwt: { maxAge: settings.sessionMaxAgeSeconds },
    pages: { signIn: '/signin', error: '/signin' },
    providers: [
      CredentialsProvider({
        id: 'credentials',
        name: 'Email and password',
        credentials: {
          email: { label: 'Email', type: 'email' },
          password: { label: 'Password', type: 'password' },
        },
        async authorize(credentials, req) {
          const address = clientAddressFromForwardedFor(headerValue(req.headers, 'x-forwarded-for'), settings.proxyHops);
          const result = await authenticateCredentials(db(), credentials ?? {}, { address, now: new Date() });
          if (result.ok) return { id: result.userId };
          if (result.reason === 'throttled') {
            // next-auth passes a thrown message to the client as `error`; the sign-in form maps it.
            throw new Error(`${SIGN_IN_ERRORS.throttledPrefix}${result.retryAfterSeconds}`);
          }
          return null;
        },
      }),
    ],
    callbacks: {
      // Keep only the subject (user id) and the sign-in time: no name, email or picture. The
      // sign-in time caps the lifetime even if the token is re-issued by /api/auth/session.
      async jwt({ token, user }) {
        const now = Math.floor(Date.now() / 1000);
        if (user?.id) return { sub: user.id, authTime: now };
        const authTime = typeof token.authTime === 'number' ? token.authTime : 0;
        if (typeof token.sub !== 'string' || now - authTime > settings.sessionMaxAgeSeconds) return {};
        return { sub: token.sub, authTime };
      },
      async session({ session, token }): Promise<Session> {
        return { expires: session.expires, userId: typeof token.sub === 'string' ? token.sub : undefined };
      },
      // Only same-origin relative paths.
      async redirect({ url, baseUrl }) {
        if (url.startsWith('/') && !url.startsWith('//')) return `${baseUrl}${url}`;
        try {
          if (new URL(url).origin === new URL(baseUrl).origin) return url;
        } catch {
          // fall through
        }
        return baseUrl;
      },
    },
    events: {
      async signOut({ token }) {
        const userId = typeof token?.sub === 'string' ? token.sub : null;
        if (userId) await recordAudit(db(), { action: 'auth.sign-out', userId }).catch(() => undefined);
      },
    },
    logger: {
      // next-auth logs a decryption failure of a tampered cookie as JWT_SESSION_ERROR; keep it
      // to one line without the token.
      error(code) {
        console.warn(`[auth] ${code}`);
      },
      warn(code) {
        if (code !== 'NEXTAUTH_URL' || process.env.NODE_ENV === 'production') console.warn(`[auth] warning ${code}`);
      },
      debug() {},
    },
  };
  return cached;
}

/** Reset for tests that change the settings. */
export function resetAuthOptionsForTests(): void {
  cached = null;
}

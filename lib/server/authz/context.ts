/**
 * Where the wrapper gets the caller's identity and address from.
 *
 * In the running app this is next-auth's getServerSession (the session cookie, decrypted and
 * checked by next-auth) and the request headers from next/headers. Tests run actions outside a
 * Next request; they supply their own context with `runWithRequestContext`, which lives in an
 * AsyncLocalStorage for the duration of one call and is never set by the app itself.
 */
import { AsyncLocalStorage } from 'node:async_hooks';
import { getServerSession } from 'next-auth/next';
import { headers } from 'next/headers';
import { clientAddressFromForwardedFor } from '../auth/address';
import { authSettings } from '../auth/config';
import { authOptions } from '../auth/options';

export interface RequestContext {
  /**
   * The user id claimed by a valid session token, or null when signed out (no cookie, expired,
   * tampered, or signed with another secret). An identity claim only: the wrapper re-reads the
   * user and their membership from the database.
   */
  sessionUserId(): Promise<string | null>;
  /** Client address for throttling and the audit log (see lib/server/auth/address.ts). */
  address(): Promise<string>;
  /** The request's clock. */
  now(): Date;
}

const storage = new AsyncLocalStorage<RequestContext>();

/** Runs `fn` with `ctx` as the request context (tests, scripts). */
export function runWithRequestContext<T>(ctx: RequestContext, fn: () => Promise<T>): Promise<T> {
  return storage.run(ctx, fn);
}

/** The session id from next-auth's session object (see options.ts session callback). */
export function userIdFromSession(session: unknown): string | null {
  if (!session || typeof session !== 'object') return null;
  const id = (session as { userId?: unknown }).userId;
  return typeof id === 'string' && id.length > 0 ? id : null;
}

/** Reads the session and headers of the current Next request. */
export const nextRequestContext: RequestContext = {
  async sessionUserId() {
    return userIdFromSession(await getServerSession(authOptions()));
  },
  async address() {
    const h = await headers();
    return clientAddressFromForwardedFor(h.get('x-forwarded-for'), authSettings().proxyHops);
  },
  now() {
    return new Date();
  },
};

export function requestContext(): RequestContext {
  return storage.getStore() ?? nextRequestContext;
}

/**
 * Session helpers for server components and for code that holds raw cookies.
 */
import { IncomingMessage, ServerResponse } from 'node:http';
import { Socket } from 'node:net';
import { getServerSession } from 'next-auth/next';
import { requestContext, userIdFromSession } from '../authz/context';
import { db } from '../db';
import { authOptions } from './options';

export type SessionUser = { id: string; name: string; email: string; lastTeamId: string | null };

/**
 * The signed-in user, re-read from the database, or null. A token whose user no longer exists
 * counts as signed out. For server components; actions get the user from the wrapper.
 */
export async function getSessionUser(): Promise<SessionUser | null> {
  const id = await requestContext().sessionUserId();
  if (!id) return null;
  return db().user.findUnique({ where: { id }, select: { id: true, name: true, email: true, lastTeamId: true } });
}

/** next-auth's cookie names: `__Secure-` prefixed when the site URL is https. */
export function sessionCookieName(secure: boolean): string {
  return secure ? '__Secure-next-auth.session-token' : 'next-auth.session-token';
}

/**
 * The user id of the session in `cookies`, through next-auth's getServerSession (the same code
 * that serves the app): decrypts and checks the token and applies our callbacks. For code that
 * holds raw cookies outside a Next request (tests, scripts).
 */
export async function sessionUserIdFromCookies(
  cookies: Record<string, string>,
  headers: Record<string, string> = {},
): Promise<string | null> {
  const req = Object.assign(new IncomingMessage(new Socket()), { cookies });
  req.headers = headers;
  const res = new ServerResponse(req);
  return userIdFromSession(await getServerSession(req, res, authOptions()));
}

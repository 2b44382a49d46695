/**
 * The same checks as the action wrapper, for server components (pages). Pages never trust the
 * token beyond the user id: the user and their membership are read from the database on every
 * render. Another team's resource and an unknown id both render Next's not-found page.
 */
import { notFound, redirect } from 'next/navigation';
import { IdSchema } from '../../domain';
import { isFreshInstall } from '../auth/accounts';
import { getSessionUser, type SessionUser } from '../auth/session';
import { db } from '../db';
import { authorizeMember, type MemberCaller } from './define';
import type { ResourceRef } from './resources';
import { mintTeamScope, type TeamScope } from './scope';

/** Only same-site relative paths survive as a return address. */
export function safeReturnPath(value: unknown, fallback = '/'): string {
  if (typeof value !== 'string' || value.length > 512) return fallback;
  if (!value.startsWith('/') || value.startsWith('//') || value.startsWith('/\\')) return fallback;
  return value;
}

/** The signed-in user, or a redirect to sign-in (or to set-up on a fresh install). */
export async function requireUserForPage(returnTo: string): Promise<SessionUser> {
  const user = await getSessionUser();
  if (user) return user;
  if (await isFreshInstall(db())) redirect('/setup');
  redirect(`/signin?callbackUrl=${encodeURIComponent(safeReturnPath(returnTo))}`);
}

export type PageAccess = {
  user: SessionUser;
  membership: MemberCaller['membership'];
  scope: TeamScope;
};

/**
 * The caller's membership of the team owning a resource, for a page: not signed in → sign-in
 * redirect; malformed id, unknown resource, or another team's → notFound(). Screens that need
 * more than membership check `roleAtLeast(access.membership.role, …)` and explain the refusal.
 */
export async function requireResourceForPage(ref: ResourceRef, returnTo: string): Promise<PageAccess> {
  const user = await requireUserForPage(returnTo);
  const id = Object.values(ref)[0];
  if (!IdSchema.safeParse(id).success) notFound();
  const auth = await authorizeMember(db(), user.id, ref, 'member');
  if (!auth.ok) notFound();
  return { user, membership: auth.membership, scope: mintTeamScope(auth.membership.teamId) };
}

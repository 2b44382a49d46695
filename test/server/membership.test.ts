// Removal and downgrade take effect on the very next request, whatever the session token says:
// the token keeps decrypting to the same user id (it is not revoked), yet the wrapper re-reads the
// membership from the database on every call.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { changeRole } from '@/app/actions/change-role';
import { createInvitation } from '@/app/actions/create-invitation';
import { removeMember } from '@/app/actions/remove-member';
import { switchTeam } from '@/app/actions/switch-team';
import { acceptInvitation } from '@/app/actions/accept-invitation';
import { sessionCookieName, sessionUserIdFromCookies } from '@/lib/server/auth/session';
import { MEMBER_MESSAGES } from '@/lib/server/dal/members';
import { INVITATION_MESSAGES } from '@/lib/server/dal/invitations';
import { currentTeamOf } from '@/lib/server/dal/teams';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase, type Fixture } from './auth-harness';

describe('membership changes apply on the next request', () => {
  let app: AppDatabase;
  let f: Fixture;
  let lead: string;
  let reviewer: string;
  let observer: string;
  let outsider: string;

  beforeAll(async () => {
    app = await openAppDatabase();
    f = await buildFixture(app.client);
    lead = await sessionFor(f.leadA);
    reviewer = await sessionFor(f.reviewerA);
    observer = await sessionFor(f.observerA);
    outsider = await sessionFor(f.leadB);
  });
  afterAll(async () => {
    await app.close();
  });

  const as = <T>(cookie: string, fn: () => Promise<T>) => call(contextFor(cookie), fn);
  const invitationCount = () => app.client.invitation.count({ where: { teamId: f.teamA } });

  it('a downgrade applies to the next call made with the old token', async () => {
    // Promote the reviewer; with their existing token they can now invite.
    expect(await as(lead, () => changeRole({ membershipId: f.membershipReviewerA, role: 'lead' }))).toMatchObject({ ok: true });
    const made = await as(reviewer, () => createInvitation({ teamId: f.teamA, role: 'observer', expiresInHours: 24 }));
    if (!made.ok) throw new Error(made.error);

    // Downgrade to observer. Same token, next request: refused, nothing written.
    expect(await as(lead, () => changeRole({ membershipId: f.membershipReviewerA, role: 'observer' }))).toMatchObject({
      ok: true,
      data: { changed: true, role: 'observer' },
    });
    expect(await sessionUserIdFromCookies({ [sessionCookieName(false)]: reviewer })).toBe(f.reviewerA); // token still valid
    const before = await invitationCount();
    const refused = await as(reviewer, () => createInvitation({ teamId: f.teamA, role: 'lead', expiresInHours: 24 }));
    expect(refused).toEqual({ ok: false, status: 403, error: 'Only a team member with the lead role can do this.' });
    expect(await invitationCount()).toBe(before);

    // The link they made while a lead was withdrawn with the demotion.
    const useIt = await as(outsider, () => acceptInvitation({ token: made.data.token }));
    expect(useIt).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.revoked });

    const audit = await app.client.auditEvent.findMany({ where: { teamId: f.teamA, action: 'member.role-changed' }, orderBy: { id: 'asc' } });
    expect(audit.map((e) => JSON.parse(e.detail))).toMatchObject([
      { from: 'reviewer', to: 'lead', memberUserId: f.reviewerA },
      { from: 'lead', to: 'observer', memberUserId: f.reviewerA, invitationsRevoked: 1 },
    ]);
  });

  it('a removal applies to the next call made with the old token', async () => {
    expect(await as(observer, () => switchTeam({ teamId: f.teamA }))).toEqual({ ok: true, data: { teamId: f.teamA } });
    expect(await as(lead, () => removeMember({ membershipId: f.membershipObserverA }))).toEqual({
      ok: true,
      data: { removedUserId: f.observerA },
    });
    expect(await sessionUserIdFromCookies({ [sessionCookieName(false)]: observer })).toBe(f.observerA); // token still valid
    // Same token: the team is now simply not there for them.
    const r = await as(observer, () => switchTeam({ teamId: f.teamA }));
    expect(r).toMatchObject({ ok: false, status: 404 });
    const user = await app.client.user.findUniqueOrThrow({ where: { id: f.observerA } });
    expect(user.lastTeamId).toBeNull();
    expect(await currentTeamOf({ userId: f.observerA, lastTeamId: f.teamA })).toBeNull();
    const removed = await app.client.auditEvent.findFirstOrThrow({ where: { teamId: f.teamA, action: 'member.removed' } });
    expect(removed.userId).toBe(f.leadA);
    expect(JSON.parse(removed.detail)).toMatchObject({ memberUserId: f.observerA, role: 'observer' });
  });

  it('a deleted account is signed out on the next request', async () => {
    const u = await app.client.user.create({ data: { email: 'temp@pier-nine.example', name: 'Temp', passwordHash: 'x' } });
    await app.client.membership.create({ data: { teamId: f.teamA, userId: u.id, role: 'reviewer' } });
    const cookie = await sessionFor(u.id);
    expect(await as(cookie, () => switchTeam({ teamId: f.teamA }))).toMatchObject({ ok: true });
    await app.client.membership.deleteMany({ where: { userId: u.id } });
    await app.client.user.delete({ where: { id: u.id } });
    expect(await as(cookie, () => switchTeam({ teamId: f.teamA }))).toEqual({ ok: false, status: 401, error: 'Sign in to continue.' });
  });

  it('a team keeps at least one lead', async () => {
    // The reviewer was demoted above, so the lead is the only lead now.
    const leads = await app.client.membership.count({ where: { teamId: f.teamA, role: 'lead' } });
    expect(leads).toBe(1);
    const demoteSelf = await as(lead, () => changeRole({ membershipId: f.membershipLeadA, role: 'reviewer' }));
    expect(demoteSelf).toEqual({ ok: false, status: 409, error: MEMBER_MESSAGES.lastLead });
    const removeSelf = await as(lead, () => removeMember({ membershipId: f.membershipLeadA }));
    expect(removeSelf).toEqual({ ok: false, status: 409, error: MEMBER_MESSAGES.lastLead });
    expect(await app.client.membership.findUniqueOrThrow({ where: { id: f.membershipLeadA } })).toMatchObject({ role: 'lead' });
  });

  it('two leads demoting each other at the same moment cannot leave the team without a lead', async () => {
    const g = await buildFixture(app.client, new Date(), '-race');
    await app.client.membership.update({ where: { id: g.membershipReviewerA }, data: { role: 'lead' } });
    const a = await sessionFor(g.leadA);
    const b = await sessionFor(g.reviewerA);
    const results = await Promise.all([
      as(a, () => changeRole({ membershipId: g.membershipReviewerA, role: 'reviewer' })),
      as(b, () => changeRole({ membershipId: g.membershipLeadA, role: 'reviewer' })),
    ]);
    expect(results.filter((r) => r.ok).length).toBeLessThanOrEqual(1);
    expect(results.every((r) => r.ok || [403, 409].includes(r.status))).toBe(true);
    expect(await app.client.membership.count({ where: { teamId: g.teamA, role: 'lead' } })).toBeGreaterThanOrEqual(1);
  });

  it('another team cannot see or touch these memberships (404, unchanged)', async () => {
    const before = await app.client.membership.findMany({ where: { teamId: f.teamA }, orderBy: { id: 'asc' } });
    expect(await as(outsider, () => changeRole({ membershipId: f.membershipLeadA, role: 'observer' }))).toMatchObject({ ok: false, status: 404 });
    expect(await as(outsider, () => removeMember({ membershipId: f.membershipLeadA }))).toMatchObject({ ok: false, status: 404 });
    expect(await app.client.membership.findMany({ where: { teamId: f.teamA }, orderBy: { id: 'asc' } })).toEqual(before);
  });
});

/**
 * Team members: list, change role, remove. Every query filters by the scope's team.
 *
 * Invariants kept inside one serializable transaction:
 * - a team always keeps at least one lead;
 * - the acting lead is still a lead of the team when the change commits;
 * - a member who is removed, or a lead who is demoted, loses the pending invitations they
 *   created (so an invitation cannot be used to come back after removal).
 */
import { isRole, type Role } from '../../domain';
import { recordAudit } from '../auth/audit';
import { conflict, forbidden, notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db, type DbTx } from '../db';

export type MemberRow = {
  membershipId: string;
  userId: string;
  name: string;
  email: string;
  role: Role;
  joinedAt: Date;
};

export async function listMembers(scope: TeamScope): Promise<MemberRow[]> {
  const rows = await db().membership.findMany({
    where: { teamId: scope.teamId },
    orderBy: [{ createdAt: 'asc' }, { id: 'asc' }],
    select: { id: true, role: true, createdAt: true, user: { select: { id: true, name: true, email: true } } },
  });
  return rows
    .filter((r) => isRole(r.role))
    .map((r) => ({
      membershipId: r.id,
      userId: r.user.id,
      name: r.user.name,
      email: r.user.email,
      role: r.role as Role,
      joinedAt: r.createdAt,
    }));
}

export const MEMBER_MESSAGES = {
  lastLead: 'A team needs at least one lead. Make another member a lead first.',
  notLeadAnymore: 'You are no longer a lead of this team.',
} as const;

type Actor = { userId: string; address: string | null; now: Date };

async function assertActorIsLead(tx: DbTx, scope: TeamScope, actor: Actor): Promise<void> {
  const me = await tx.membership.findUnique({ where: { teamId_userId: { teamId: scope.teamId, userId: actor.userId } }, select: { role: true } });
  if (!me) throw notFound();
  if (me.role !== 'lead') throw forbidden(MEMBER_MESSAGES.notLeadAnymore);
}

async function revokePendingInvitationsBy(tx: DbTx, scope: TeamScope, userId: string, now: Date): Promise<number> {
  const r = await tx.invitation.updateMany({
    where: { teamId: scope.teamId, createdById: userId, acceptedAt: null, revokedAt: null, expiresAt: { gt: now } },
    data: { revokedAt: now },
  });
  return r.count;
}

export async function changeMemberRole(
  scope: TeamScope,
  input: { membershipId: string; role: Role },
  actor: Actor,
): Promise<{ membershipId: string; role: Role; changed: boolean }> {
  return db().$transaction(
    async (tx) => {
      await assertActorIsLead(tx, scope, actor);
      const target = await tx.membership.findFirst({ where: { id: input.membershipId, teamId: scope.teamId } });
      if (!target) throw notFound();
      if (target.role === input.role) return { membershipId: target.id, role: input.role, changed: false };
      if (target.role === 'lead') {
        const leads = await tx.membership.count({ where: { teamId: scope.teamId, role: 'lead' } });
        if (leads <= 1) throw conflict(MEMBER_MESSAGES.lastLead);
      }
      await tx.membership.update({ where: { id: target.id }, data: { role: input.role } });
      const revoked = target.role === 'lead' ? await revokePendingInvitationsBy(tx, scope, target.userId, actor.now) : 0;
      await recordAudit(tx, {
        action: 'member.role-changed',
        teamId: scope.teamId,
        userId: actor.userId,
        targetType: 'membership',
        targetId: target.id,
        detail: { memberUserId: target.userId, from: target.role, to: input.role, invitationsRevoked: revoked },
        address: actor.address,
      });
      return { membershipId: target.id, role: input.role, changed: true };
    },
    { isolationLevel: 'Serializable' },
  );
}

export async function removeMember(scope: TeamScope, input: { membershipId: string }, actor: Actor): Promise<{ removedUserId: string }> {
  return db().$transaction(
    async (tx) => {
      await assertActorIsLead(tx, scope, actor);
      const target = await tx.membership.findFirst({ where: { id: input.membershipId, teamId: scope.teamId } });
      if (!target) throw notFound();
      if (target.role === 'lead') {
        const leads = await tx.membership.count({ where: { teamId: scope.teamId, role: 'lead' } });
        if (leads <= 1) throw conflict(MEMBER_MESSAGES.lastLead);
      }
      await tx.membership.delete({ where: { id: target.id } });
      const revoked = await revokePendingInvitationsBy(tx, scope, target.userId, actor.now);
      await tx.user.updateMany({ where: { id: target.userId, lastTeamId: scope.teamId }, data: { lastTeamId: null } });
      await recordAudit(tx, {
        action: 'member.removed',
        teamId: scope.teamId,
        userId: actor.userId,
        targetType: 'membership',
        targetId: target.id,
        detail: { memberUserId: target.userId, role: target.role, invitationsRevoked: revoked },
        address: actor.address,
      });
      return { removedUserId: target.userId };
    },
    { isolationLevel: 'Serializable' },
  );
}

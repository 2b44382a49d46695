/**
 * Invitation links. The secret in a link is 32 random bytes (base64url); only its SHA-256 is
 * stored, so the database never holds a usable link. A link is single use, expires (1, 3 or 7
 * days) and can be revoked; accepting it is one conditional update, so two people racing with
 * the same link cannot both join.
 *
 * Team-owned operations take a TeamScope first. Looking an invitation up *by its secret* is the
 * one unscoped read: the secret itself is the capability, and it yields only what the
 * invitation page shows (team name, role, state).
 */
import { createHash, randomBytes } from 'node:crypto';
import { isRole, type Role } from '../../domain';
import { recordAudit } from '../auth/audit';
import { ActionError, conflict, notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db, type Db, type DbTx } from '../db';

/** Pending invitations a team may have at once (abuse guard). */
export const MAX_PENDING_INVITATIONS = 50;

export const INVITATION_MESSAGES = {
  unknown: 'This invitation link is not valid. Check that the whole link was copied, or ask a team lead for a new one.',
  expired: 'This invitation link has expired. Ask a team lead for a new one.',
  used: 'This invitation link has already been used. Each link works once; ask a team lead for a new one.',
  revoked: 'This invitation link was withdrawn by a team lead. Ask a team lead for a new one.',
  alreadyMember: (team: string) => `You are already a member of ${team}.`,
  tooMany: `This team already has ${MAX_PENDING_INVITATIONS} pending invitations. Revoke some before creating more.`,
  notPending: 'That invitation is no longer pending.',
} as const;

export function hashInvitationToken(token: string): string {
  return createHash('sha256').update(token, 'utf8').digest('hex');
}

export function newInvitationToken(): string {
  return randomBytes(32).toString('base64url');
}

export type PendingInvitation = {
  id: string;
  role: Role;
  label: string | null;
  createdAt: Date;
  expiresAt: Date;
  createdByName: string;
};

export async function listPendingInvitations(scope: TeamScope, now: Date): Promise<PendingInvitation[]> {
  const rows = await db().invitation.findMany({
    where: { teamId: scope.teamId, acceptedAt: null, revokedAt: null, expiresAt: { gt: now } },
    orderBy: { createdAt: 'desc' },
    select: { id: true, role: true, label: true, createdAt: true, expiresAt: true, createdBy: { select: { name: true } } },
  });
  return rows
    .filter((r) => isRole(r.role))
    .map((r) => ({
      id: r.id,
      role: r.role as Role,
      label: r.label,
      createdAt: r.createdAt,
      expiresAt: r.expiresAt,
      createdByName: r.createdBy.name,
    }));
}

type Actor = { userId: string; address: string | null; now: Date };

export async function createInvitation(
  scope: TeamScope,
  input: { role: Role; expiresInHours: number; label?: string },
  actor: Actor,
): Promise<{ id: string; token: string; role: Role; expiresAt: Date }> {
  const token = newInvitationToken();
  const expiresAt = new Date(actor.now.getTime() + input.expiresInHours * 3600_000);
  return db().$transaction(async (tx) => {
    const pending = await tx.invitation.count({
      where: { teamId: scope.teamId, acceptedAt: null, revokedAt: null, expiresAt: { gt: actor.now } },
    });
    if (pending >= MAX_PENDING_INVITATIONS) throw conflict(INVITATION_MESSAGES.tooMany);
    const inv = await tx.invitation.create({
      data: {
        teamId: scope.teamId,
        role: input.role,
        tokenHash: hashInvitationToken(token),
        label: input.label && input.label.length > 0 ? input.label : null,
        createdById: actor.userId,
        createdAt: actor.now,
        expiresAt,
      },
    });
    await recordAudit(tx, {
      action: 'invitation.created',
      teamId: scope.teamId,
      userId: actor.userId,
      targetType: 'invitation',
      targetId: inv.id,
      detail: { role: input.role, expiresAt: expiresAt.toISOString() },
      address: actor.address,
    });
    return { id: inv.id, token, role: input.role, expiresAt };
  });
}

export async function revokeInvitation(scope: TeamScope, invitationId: string, actor: Actor): Promise<{ id: string }> {
  return db().$transaction(async (tx) => {
    const r = await tx.invitation.updateMany({
      where: { id: invitationId, teamId: scope.teamId, acceptedAt: null, revokedAt: null },
      data: { revokedAt: actor.now },
    });
    if (r.count === 0) {
      const existing = await tx.invitation.findFirst({ where: { id: invitationId, teamId: scope.teamId }, select: { id: true } });
      if (!existing) throw notFound();
      throw conflict(INVITATION_MESSAGES.notPending);
    }
    await recordAudit(tx, {
      action: 'invitation.revoked',
      teamId: scope.teamId,
      userId: actor.userId,
      targetType: 'invitation',
      targetId: invitationId,
      address: actor.address,
    });
    return { id: invitationId };
  });
}

export type InvitationState = 'valid' | 'expired' | 'used' | 'revoked' | 'unknown';

export type InvitationView =
  | { state: 'unknown' }
  | { state: Exclude<InvitationState, 'unknown'>; id: string; teamId: string; teamName: string; role: Role; expiresAt: Date };

function stateOf(inv: { acceptedAt: Date | null; revokedAt: Date | null; expiresAt: Date }, now: Date): Exclude<InvitationState, 'unknown'> {
  if (inv.acceptedAt) return 'used';
  if (inv.revokedAt) return 'revoked';
  if (inv.expiresAt.getTime() <= now.getTime()) return 'expired';
  return 'valid';
}

/** What the invitation page may show about a link. The secret is the capability. */
export async function inspectInvitation(client: Db | DbTx, token: string, now: Date): Promise<InvitationView> {
  const inv = await client.invitation.findUnique({
    where: { tokenHash: hashInvitationToken(token) },
    select: { id: true, teamId: true, role: true, acceptedAt: true, revokedAt: true, expiresAt: true, team: { select: { name: true } } },
  });
  if (!inv || !isRole(inv.role)) return { state: 'unknown' };
  return { state: stateOf(inv, now), id: inv.id, teamId: inv.teamId, teamName: inv.team.name, role: inv.role, expiresAt: inv.expiresAt };
}

/** The refusal for a link that cannot be used, as an ActionError with a clear message. */
export function invitationRefusal(view: InvitationView): ActionError {
  switch (view.state) {
    case 'unknown':
      return new ActionError(404, INVITATION_MESSAGES.unknown);
    case 'expired':
      return new ActionError(409, INVITATION_MESSAGES.expired);
    case 'used':
      return new ActionError(409, INVITATION_MESSAGES.used);
    case 'revoked':
      return new ActionError(409, INVITATION_MESSAGES.revoked);
    default:
      return new ActionError(409, INVITATION_MESSAGES.notPending);
  }
}

/**
 * Uses the link for `userId` inside the caller's transaction: marks it accepted (only if still
 * pending and unexpired — one conditional update), adds the membership with the invited role,
 * makes the team the user's current one, and audits. Throws an ActionError when the link cannot
 * be used or the user is already a member (the transaction then rolls back).
 */
export async function consumeInvitation(
  tx: DbTx,
  input: { token: string; userId: string; address: string | null; now: Date },
): Promise<{ teamId: string; teamName: string; role: Role; membershipId: string }> {
  const view = await inspectInvitation(tx, input.token, input.now);
  if (view.state !== 'valid') throw invitationRefusal(view);
  const claimed = await tx.invitation.updateMany({
    where: { id: view.id, acceptedAt: null, revokedAt: null, expiresAt: { gt: input.now } },
    data: { acceptedAt: input.now, acceptedById: input.userId },
  });
  if (claimed.count !== 1) throw invitationRefusal(await inspectInvitation(tx, input.token, input.now));
  const existing = await tx.membership.findUnique({
    where: { teamId_userId: { teamId: view.teamId, userId: input.userId } },
    select: { id: true },
  });
  if (existing) throw conflict(INVITATION_MESSAGES.alreadyMember(view.teamName));
  const membership = await tx.membership.create({ data: { teamId: view.teamId, userId: input.userId, role: view.role } });
  await tx.user.update({ where: { id: input.userId }, data: { lastTeamId: view.teamId } });
  await recordAudit(tx, {
    action: 'invitation.accepted',
    teamId: view.teamId,
    userId: input.userId,
    targetType: 'invitation',
    targetId: view.id,
    address: input.address,
  });
  await recordAudit(tx, {
    action: 'member.added',
    teamId: view.teamId,
    userId: input.userId,
    targetType: 'membership',
    targetId: membership.id,
    detail: { role: view.role, via: 'invitation', memberUserId: input.userId },
    address: input.address,
  });
  return { teamId: view.teamId, teamName: view.teamName, role: view.role, membershipId: membership.id };
}

/**
 * Teams and the caller's own list of teams.
 * Team-owned reads take a TeamScope first; the per-user list takes a UserScope.
 */
import { isRole, type Role } from '../../domain';
import { recordAudit } from '../auth/audit';
import { conflict } from '../authz/errors';
import { mintTeamScope, type TeamScope, type UserScope } from '../authz/scope';
import { db, type DbTx } from '../db';

/** Upper bound on teams one person can create or belong to (abuse guard). */
export const MAX_TEAMS_PER_USER = 50;

export type MyTeam = { teamId: string; name: string; role: Role; membershipId: string };

/** The user's teams, oldest membership first. */
export async function listMyTeams(user: UserScope): Promise<MyTeam[]> {
  const rows = await db().membership.findMany({
    where: { userId: user.userId },
    orderBy: [{ createdAt: 'asc' }, { id: 'asc' }],
    select: { id: true, role: true, team: { select: { id: true, name: true } } },
  });
  return rows.filter((r) => isRole(r.role)).map((r) => ({ teamId: r.team.id, name: r.team.name, role: r.role as Role, membershipId: r.id }));
}

/**
 * The team the user works in now: their last chosen team if they are still a member, else their
 * first team; null when they belong to none. Membership is read from the database each time.
 */
export async function currentTeamOf(user: UserScope & { lastTeamId: string | null }): Promise<{ team: MyTeam; scope: TeamScope; all: MyTeam[] } | null> {
  const all = await listMyTeams(user);
  const team = all.find((t) => t.teamId === user.lastTeamId) ?? all[0];
  if (!team) return null;
  return { team, scope: mintTeamScope(team.teamId), all };
}

export async function getTeam(scope: TeamScope): Promise<{ id: string; name: string; createdAt: Date } | null> {
  return db().team.findUnique({ where: { id: scope.teamId }, select: { id: true, name: true, createdAt: true } });
}

/**
 * Creates a team with `userId` as its lead, inside the caller's transaction, and makes it their
 * current team. Returns the new team's scope.
 */
export async function createTeamWithLead(
  tx: DbTx,
  input: { name: string; userId: string; address: string | null },
): Promise<{ teamId: string; scope: TeamScope }> {
  const count = await tx.membership.count({ where: { userId: input.userId } });
  if (count >= MAX_TEAMS_PER_USER) throw conflict(`You already belong to ${MAX_TEAMS_PER_USER} teams, the most one person can have.`);
  const team = await tx.team.create({ data: { name: input.name } });
  const membership = await tx.membership.create({ data: { teamId: team.id, userId: input.userId, role: 'lead' } });
  await tx.user.update({ where: { id: input.userId }, data: { lastTeamId: team.id } });
  await recordAudit(tx, {
    action: 'team.created',
    teamId: team.id,
    userId: input.userId,
    targetType: 'team',
    targetId: team.id,
    detail: { name: input.name },
    address: input.address,
  });
  await recordAudit(tx, {
    action: 'member.added',
    teamId: team.id,
    userId: input.userId,
    targetType: 'membership',
    targetId: membership.id,
    detail: { role: 'lead', via: 'team-created', memberUserId: input.userId },
    address: input.address,
  });
  return { teamId: team.id, scope: mintTeamScope(team.id) };
}

/** Records the user's current team. The caller has checked membership of `scope`. */
export async function setCurrentTeam(scope: TeamScope, user: UserScope): Promise<void> {
  await db().user.update({ where: { id: user.userId }, data: { lastTeamId: scope.teamId } });
}

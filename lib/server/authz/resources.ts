/**
 * Which team owns a resource, and who the caller is in that team. The wrapper resolves the
 * resource an action names to its team, then checks the caller's membership of that team; an
 * unknown id and another team's id look the same to the caller (404), so ids do not leak.
 *
 * One statement reads the user, the resource's team and the caller's membership of it: every
 * action runs this first, and on PostgreSQL each sequential round trip of the busiest request
 * ("next") cost 5–20 ms under load. Raw SQL, like the queue's hot reads: a one-row read through
 * the ORM cost several times the database's own time on the server thread.
 *
 * To make a new kind of resource addressable, add it to ResourceRef and to teamOf.
 */
import { Prisma, type Db, type DbTx } from '../db';

export type ResourceRef =
  | { teamId: string }
  | { projectId: string }
  | { invitationId: string }
  | { membershipId: string }
  | { tokenId: string };

/** A one-column query giving the team that owns the resource (no row when it does not exist). */
function teamOf(ref: ResourceRef): Prisma.Sql {
  if ('teamId' in ref) return Prisma.sql`SELECT "id" AS "teamId" FROM "Team" WHERE "id" = ${ref.teamId}`;
  if ('projectId' in ref) return Prisma.sql`SELECT "teamId" FROM "Project" WHERE "id" = ${ref.projectId}`;
  if ('invitationId' in ref) return Prisma.sql`SELECT "teamId" FROM "Invitation" WHERE "id" = ${ref.invitationId}`;
  if ('tokenId' in ref) {
    return Prisma.sql`SELECT p."teamId" FROM "PipelineToken" t JOIN "Project" p ON p."id" = t."projectId" WHERE t."id" = ${ref.tokenId}`;
  }
  return Prisma.sql`SELECT "teamId" FROM "Membership" WHERE "id" = ${ref.membershipId}`;
}

export interface CallerRecord {
  readonly user: { id: string; name: string; email: string };
  /** the team owning the resource asked about; null when there is none (or no resource was asked about) */
  readonly teamId: string | null;
  /** the user's membership of that team; null when not a member */
  readonly membership: { id: string; role: string; teamId: string } | null;
}

interface CallerRow {
  readonly id: string;
  readonly name: string;
  readonly email: string;
  readonly teamId: string | null;
  readonly membershipId: string | null;
  readonly role: string | null;
}

/**
 * The user with this id (null when the account no longer exists) and, given a resource, the team
 * owning it and the user's membership of that team — as stored now, never from the session token.
 */
export async function readCaller(client: Db | DbTx, userId: string, ref?: ResourceRef): Promise<CallerRecord | null> {
  const rows = ref
    ? await client.$queryRaw<CallerRow[]>`
        SELECT u."id", u."name", u."email", r."teamId", m."id" AS "membershipId", m."role"
        FROM "User" u
        LEFT JOIN (${teamOf(ref)}) r ON 1 = 1
        LEFT JOIN "Membership" m ON m."teamId" = r."teamId" AND m."userId" = u."id"
        WHERE u."id" = ${userId}`
    : await client.$queryRaw<CallerRow[]>`
        SELECT "id", "name", "email", NULL AS "teamId", NULL AS "membershipId", NULL AS "role" FROM "User" WHERE "id" = ${userId}`;
  const r = rows[0];
  if (!r) return null;
  return {
    user: { id: r.id, name: r.name, email: r.email },
    teamId: r.teamId,
    membership: r.teamId !== null && r.membershipId !== null && r.role !== null ? { id: r.membershipId, role: r.role, teamId: r.teamId } : null,
  };
}

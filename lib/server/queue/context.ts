/**
 * What every queue service function receives: the database, the caller's team scope (checked by
 * the authorization wrapper), the acting user with their role as re-read from the database, and a
 * clock (injected in tests so lease and undo windows can be stepped through without waiting).
 */
import type { Role } from '../../domain';
import type { TeamScope } from '../authz/scope';
import type { Db, DbTx } from '../db';
import { notFound } from '../authz/errors';

export type Clock = () => Date;
export const systemClock: Clock = () => new Date();

export interface Actor {
  readonly userId: string;
  readonly role: Role;
}

export interface QueueDeps {
  readonly db: Db;
  readonly clock?: Clock;
  /**
   * How long "next" waits for a nearest-neighbour search that is not cached yet (view.ts); past it
   * the item is answered with `neighbours: null` and the search goes on, its result cached for the
   * screen's follow-up request. Unset: wait for the search (services, tests, scripts).
   */
  readonly neighbourWaitMs?: number;
}

export function nowOf(deps: QueueDeps): Date {
  return (deps.clock ?? systemClock)();
}

export interface ProjectRow {
  readonly id: string;
  readonly teamId: string;
  readonly name: string;
  readonly settings: string;
  readonly currentRevision: number;
  readonly featureCount: number;
}

/**
 * The project if it belongs to the scope's team; otherwise "not found" (never "forbidden"). Raw SQL:
 * every queue request starts here, and a one-row read through the ORM cost several times the
 * database's own time on the server thread.
 */
export async function projectInScope(client: Db | DbTx, scope: TeamScope, projectId: string): Promise<ProjectRow> {
  const rows = await client.$queryRaw<(Omit<ProjectRow, 'currentRevision' | 'featureCount'> & { currentRevision: number | bigint; featureCount: number | bigint })[]>`
    SELECT "id", "teamId", "name", "settings", "currentRevision", "featureCount" FROM "Project" WHERE "id" = ${projectId} AND "teamId" = ${scope.teamId}`;
  const p = rows[0];
  if (!p) throw notFound();
  return { id: p.id, teamId: p.teamId, name: p.name, settings: p.settings, currentRevision: Number(p.currentRevision), featureCount: Number(p.featureCount) };
}

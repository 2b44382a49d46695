/**
 * What every queue service function receives: the database, the caller's team scope (checked by
 * the authorization wrapper), the acting user with their role as re-read from the database, and a
 * clock (injected in tests so lease and undo windows can be stepped through without waiting).
 */
import type { Role } from '../../domain';
import type { TeamScope } from '../authz/scope';
import type { Db, DbTx } from '../db';
import { notFound } from '../authz/errors';
import type { FeatureMatrix } from '../fits/data';

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
   * How long "next" waits for its item's nearest neighbours when they are not at hand — the
   * project's feature matrix not yet in memory (read once per server process and data revision:
   * seconds for 100k × 256) and the search not cached (view.ts); past it the item is answered with
   * `neighbours: null` while the read and the search go on, their results cached for the screen's
   * follow-up request. Unset: wait for both (services, tests, scripts).
   */
  readonly neighbourWaitMs?: number;
  /** Where the item read gets the feature matrix; default `featureMatrixForReading` (tests substitute a slow one). */
  readonly featureMatrix?: (db: Db, projectId: string, revisionKey: string) => Promise<FeatureMatrix>;
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

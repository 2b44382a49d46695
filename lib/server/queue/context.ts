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

const projectSelect = { id: true, teamId: true, name: true, settings: true, currentRevision: true, featureCount: true } as const;

/** The project if it belongs to the scope's team; otherwise "not found" (never "forbidden"). */
export async function projectInScope(client: Db | DbTx, scope: TeamScope, projectId: string): Promise<ProjectRow> {
  const project = await client.project.findFirst({ where: { id: projectId, teamId: scope.teamId }, select: projectSelect });
  if (!project) throw notFound();
  return project;
}

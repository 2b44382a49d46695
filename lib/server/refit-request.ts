/**
 * The one call that asks for a refit after labels or samples changed.
 *
 * `requestRefit` records the request as a Fit row with status `queued` for the given revision
 * (with the project's settings snapshot), inside the caller's transaction when one is passed,
 * so the new revision and the request to fit it commit together or not at all. The worker that
 * consumes queued fits — coalescing bursts, running the engine off the request path, writing
 * results against their revision — belongs to the fit queue (lib/server/fits/); after the
 * transaction commits, call `announceRefit` so a worker running in this process starts at once
 * instead of at its next poll.
 */
import { notFound } from './authz/errors';
import type { TeamScope } from './authz/scope';
import { db, type Db, type DbTx } from './db';
import { enqueueFitTx } from './fits/enqueue';
import { notifyFitQueued } from './fits/jobs';

export interface RefitRequest {
  fitId: string;
  projectId: string;
  revisionNumber: number;
}

export async function requestRefit(
  scope: TeamScope,
  projectId: string,
  revisionNumber: number,
  options: { tx?: Db | DbTx } = {},
): Promise<RefitRequest> {
  const client = options.tx ?? db();
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: { id: true, settings: true },
  });
  if (project === null) throw notFound();
  const revision = await client.revision.findUnique({
    where: { projectId_number: { projectId, number: revisionNumber } },
    select: { id: true, number: true },
  });
  if (revision === null) throw notFound();
  const fitId = await enqueueFitTx(client, project, revision);
  return { fitId, projectId, revisionNumber };
}

/** Tells an in-process fit worker (if any) that a request committed. Never throws. */
export async function announceRefit(request: RefitRequest): Promise<void> {
  try {
    await notifyFitQueued({ projectId: request.projectId, revisionNumber: request.revisionNumber, fitId: request.fitId });
  } catch (error) {
    console.error('[refit-request] could not notify the fit worker; it will pick the request up at its next poll', error);
  }
}

/**
 * Records a refit request (a queued Fit row) inside the caller's transaction, so that a new
 * revision and the request to fit it commit together. After the commit, call
 * `notifyFitQueued` (jobs.ts) so an in-process worker starts without waiting for its poll.
 */
import { readProjectSettings } from '../../domain-queue';
import type { Db, DbTx } from '../db';
import { writeTx } from '../queue/tx';

/** The settings snapshot a fit runs with: the project's settings, complete with defaults. */
export function settingsSnapshot(projectSettingsJson: string): string {
  return JSON.stringify(readProjectSettings(projectSettingsJson));
}

export async function enqueueFitTx(
  tx: Db | DbTx,
  project: { id: string; settings: string },
  revision: { id: string; number: number },
): Promise<string> {
  const fit = await tx.fit.create({
    data: {
      projectId: project.id,
      revisionId: revision.id,
      revisionNumber: revision.number,
      status: 'queued',
      settings: settingsSnapshot(project.settings),
    },
    select: { id: true },
  });
  return fit.id;
}

/** Queues a fit of the project's current revision (e.g. after its settings changed). */
export async function enqueueCurrentRevisionTx(tx: Db | DbTx, projectId: string): Promise<{ fitId: string; revisionNumber: number } | null> {
  const project = await tx.project.findUnique({ where: { id: projectId }, select: { id: true, settings: true, currentRevision: true } });
  if (!project) return null;
  const revision = await tx.revision.findUnique({
    where: { projectId_number: { projectId, number: project.currentRevision } },
    select: { id: true, number: true },
  });
  if (!revision) return null;
  const fitId = await enqueueFitTx(tx, project, revision);
  return { fitId, revisionNumber: revision.number };
}

/**
 * Queues a first fit for every project that has a revision but never had a fit (a seed script or a
 * migration wrote its samples directly). Safe to run from several processes at once.
 */
export async function queueFirstFits(db: Db, log: (line: string) => void = () => {}): Promise<number> {
  const projects = await db.project.findMany({ where: { fits: { none: {} }, revisions: { some: {} } }, select: { id: true } });
  let queued = 0;
  for (const p of projects) {
    try {
      const made = await writeTx(db, [{ table: 'Project', id: p.id }], async (tx) => {
        if ((await tx.fit.count({ where: { projectId: p.id } })) > 0) return null;
        return enqueueCurrentRevisionTx(tx, p.id);
      });
      if (made) queued++;
    } catch (e) {
      log(`could not queue the first fit of project ${p.id}: ${e instanceof Error ? e.message : String(e)}`);
    }
  }
  return queued;
}

/**
 * Labels as they stood at a revision, rebuilt from the current labels and the LabelChange history
 * (a change with revisionNumber r took the sample from `fromLabel` to `toLabel` when revision r
 * was made). Team scoping is the caller's job (every entry point checks the project first).
 */
import type { Db } from '../db';

/** sampleId → label at revision `revision` (samples added after it are left out). */
export async function labelsAtRevision(client: Db, projectId: string, revision: number): Promise<Map<string, string>> {
  const [samples, changes] = await Promise.all([
    client.sample.findMany({ where: { projectId, addedRevision: { lte: revision } }, select: { id: true, currentLabel: true } }),
    client.labelChange.findMany({
      where: { projectId, revisionNumber: { gt: revision } },
      orderBy: [{ revisionNumber: 'desc' }],
      select: { sampleId: true, fromLabel: true },
    }),
  ]);
  const out = new Map(samples.map((s) => [s.id, s.currentLabel] as const));
  // Undo the newest changes first; the last undo written is the oldest change after `revision`.
  for (const c of changes) if (out.has(c.sampleId)) out.set(c.sampleId, c.fromLabel);
  return out;
}

/** Project of the caller's team, or null (another team's id reads as "not there"). */
export async function scopedProject(client: Db, teamId: string, projectId: string) {
  return client.project.findFirst({
    where: { id: projectId, teamId },
    select: { id: true, name: true, currentRevision: true, featureCount: true, settings: true, classes: { orderBy: { position: 'asc' }, select: { name: true } } },
  });
}

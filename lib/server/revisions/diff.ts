/**
 * What changed between two revisions: every sample whose label at revision `to` differs from its
 * label at revision `from` (a label changed and changed back counts as unchanged), with the
 * decisions that made the change — the reviewers' votes of the queue item, the lead who broke a
 * tie, and who recorded the change.
 */
import type { TeamScope } from '../authz/scope';
import type { Db } from '../db';
import { scopedProject } from './labels';

export interface DiffVote {
  readonly by: string;
  readonly decision: string;
  readonly label: string | null;
}

export interface DiffEntry {
  readonly sampleId: string;
  readonly externalId: string;
  readonly from: string;
  readonly to: string;
  /** revision numbers of the changes, oldest first */
  readonly revisions: readonly number[];
  /** the last change's decisions */
  readonly votes: readonly DiffVote[];
  readonly tiebreakBy: string | null;
  readonly recordedBy: string | null;
}

export interface RevisionDiff {
  readonly from: number;
  readonly to: number;
  readonly entries: readonly DiffEntry[];
  /** entries before the display limit */
  readonly total: number;
}

export const DIFF_LIMIT = 1000;

/** The diff of two revisions (order-insensitive) of a project of the caller's team; null when not there. */
export async function revisionDiff(client: Db, scope: TeamScope, projectId: string, a: number, b: number, limit = DIFF_LIMIT): Promise<RevisionDiff | null> {
  const project = await scopedProject(client, scope.teamId, projectId);
  if (!project) return null;
  const from = Math.min(a, b);
  const to = Math.max(a, b);
  const changes = await client.labelChange.findMany({
    where: { projectId, revisionNumber: { gt: from, lte: to } },
    orderBy: [{ revisionNumber: 'asc' }],
    select: {
      sampleId: true,
      revisionNumber: true,
      fromLabel: true,
      toLabel: true,
      sample: { select: { externalId: true } },
      decidedBy: { select: { name: true } },
      queueItem: {
        select: {
          tiebreakBy: { select: { name: true } },
          votes: { orderBy: { createdAt: 'asc' }, select: { decision: true, label: true, user: { select: { name: true } } } },
        },
      },
    },
  });
  const bySample = new Map<string, DiffEntry>();
  for (const c of changes) {
    const prev = bySample.get(c.sampleId);
    bySample.set(c.sampleId, {
      sampleId: c.sampleId,
      externalId: c.sample.externalId,
      from: prev ? prev.from : c.fromLabel,
      to: c.toLabel,
      revisions: prev ? [...prev.revisions, c.revisionNumber] : [c.revisionNumber],
      votes: (c.queueItem?.votes ?? []).map((v) => ({ by: v.user.name, decision: v.decision, label: v.label })),
      tiebreakBy: c.queueItem?.tiebreakBy?.name ?? null,
      recordedBy: c.decidedBy?.name ?? null,
    });
  }
  const entries = [...bySample.values()].filter((e) => e.from !== e.to).sort((x, y) => x.externalId.localeCompare(y.externalId));
  return { from, to, entries: entries.slice(0, limit), total: entries.length };
}

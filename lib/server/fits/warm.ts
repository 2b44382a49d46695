/**
 * Warming a worker process up: the first refit of a project in a process reads every feature of
 * the project (100k × 256 takes seconds), so a worker that just started reads, in the background,
 * the matrices of the projects fitted recently — newest first, within half the feature cache —
 * before a relabel asks for them. A refit arriving meanwhile shares the read under way
 * (`featureMatrix`), it never waits for the whole warm-up.
 */
import type { Db } from '../db';
import { FEATURE_CACHE_BYTES, featureMatrix } from './data';

export interface WarmUpOptions {
  /** Projects with a fit finished within this many hours (default 24). */
  readonly hours?: number;
  /** At most this many projects (default 20). */
  readonly maxProjects?: number;
  /** Byte budget for the matrices read (default half the feature cache). */
  readonly maxBytes?: number;
  readonly now?: Date;
  readonly log?: (msg: string, fields?: Record<string, unknown>) => void;
}

export interface WarmUpResult {
  readonly projects: string[];
  readonly rows: number;
  readonly ms: number;
}

export async function warmUpFeatureMatrices(db: Db, options: WarmUpOptions = {}): Promise<WarmUpResult> {
  const started = performance.now();
  const since = new Date((options.now ?? new Date()).getTime() - (options.hours ?? 24) * 3600_000);
  const recent = await db.fit.findMany({
    where: { status: 'done', finishedAt: { gte: since } },
    orderBy: { finishedAt: 'desc' },
    distinct: ['projectId'],
    take: options.maxProjects ?? 20,
    select: { projectId: true, project: { select: { featureCount: true, _count: { select: { samples: true } } } } },
  });
  let budget = options.maxBytes ?? FEATURE_CACHE_BYTES / 2;
  const projects: string[] = [];
  let rows = 0;
  for (const f of recent) {
    const bytes = f.project._count.samples * f.project.featureCount * 4;
    if (bytes > budget) continue;
    budget -= bytes;
    const t = performance.now();
    const m = await featureMatrix(db, f.projectId);
    projects.push(f.projectId);
    rows += m.rows;
    options.log?.('project warmed', { projectId: f.projectId, rows: m.rows, ms: Math.round(performance.now() - t) });
  }
  return { projects, rows, ms: performance.now() - started };
}

/**
 * Warming a worker process up: the first refit of a project in a process reads every feature of
 * the project (100k × 256 takes seconds), its labels, the newest model (warm start) and the newest
 * full pass's held-out values; so a worker that just started reads these, in the background, for
 * the projects fitted recently — newest first, within half the feature cache — before a relabel
 * asks for them (`prepareProjectMemory`). A refit arriving meanwhile shares a feature read under way
 * (`featureMatrix`); it never waits for the whole warm-up.
 */
import { DEFAULT_PROJECT_SETTINGS } from '../../domain-queue';
import type { Db } from '../db';
import type { EngineRunner } from './engine';
import { FEATURE_CACHE_BYTES } from './data';
import { engineSettings, prepareProjectMemory } from './run-fit';

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
}

export async function warmUpFeatureMatrices(db: Db, options: WarmUpOptions = {}): Promise<WarmUpResult> {
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
    const read = await prepareProjectMemory(db, f.projectId);
    projects.push(f.projectId);
    rows += read;
    options.log?.('project warmed', { projectId: f.projectId, rows: read, ms: Math.round(performance.now() - t) });
  }
  return { projects, rows };
}

/** Rows of the warm-up fit: above AUTO_DCD_ROWS, so the linear solver refits use (DCD) is compiled. */
const WARM_ROWS = 1200;
const WARM_COLS = 8;

/**
 * Starts each engine's thread and runs one small linear fit in it (1,200 × 8, deterministic), so
 * that the first real refit does not pay for starting the thread and compiling the solver.
 * Returns the classes each fit found.
 */
export async function warmUpEngines(engines: readonly EngineRunner[]): Promise<string[][]> {
  const X = new Float64Array(WARM_ROWS * WARM_COLS);
  const labels: string[] = [];
  for (let i = 0; i < WARM_ROWS; i++) {
    let s = 0;
    for (let j = 0; j < WARM_COLS; j++) {
      const v = (((i + 1) * (j + 3) * 7919) % 1009) / 1009 - 0.5;
      X[i * WARM_COLS + j] = v;
      s += j % 2 === 0 ? v : -v;
    }
    labels.push(s >= 0 ? 'up' : 'down');
  }
  const data = { ids: labels.map((_, i) => `w${i}`), labels, X: { data: X, rows: WARM_ROWS, cols: WARM_COLS } };
  const settings = { ...engineSettings(DEFAULT_PROJECT_SETTINGS, WARM_ROWS, WARM_COLS, null), pivotCap: 0 };
  const found: string[][] = [];
  for (const engine of engines) found.push([...(await engine.fit(data, settings, () => {})).classes]);
  return found;
}

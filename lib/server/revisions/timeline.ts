/**
 * Revisions over time: per revision and boundary, the numbers of the revision's fit (as written by
 * the refit service into Fit.metrics, see lib/server/fits/run-fit.ts buildMetrics), and where the
 * fit settings changed between consecutive fitted revisions.
 *
 * Which fit stands for a revision: its newest `done` fit of the full pass, else its newest `done`
 * fit (a quick pass). Out-of-fold accuracy per boundary is recomputed from the stored standings
 * (Standing.detail carries each boundary's out-of-fold decision value) while the fit still has
 * them (the refit service keeps standings of the newest few fits); otherwise it is null and only
 * the overall multi-class out-of-fold accuracy of the metrics is shown.
 */
import type { TeamScope } from '../authz/scope';
import type { Db } from '../db';
import { readProjectSettings } from '../../domain-queue';
import { unpackDetail } from '../fits/standings-store';
import { labelsAtRevision, scopedProject } from './labels';

export type HardMarginVerdict = 'separable' | 'not separable' | 'not decided';

export interface BoundaryMetrics {
  readonly name: string;
  readonly positive: string;
  readonly marginWidth: number | null;
  readonly wNorm: number | null;
  readonly hardMargin: HardMarginVerdict;
  readonly supportVectors: number | null;
  readonly wrongSide: number | null;
  readonly insideMargin: number | null;
  readonly hingeLoss: number | null;
  /** share of samples whose out-of-fold decision for this boundary has the sign of their label */
  readonly oofAccuracy: number | null;
}

export interface FitSettingsSummary {
  readonly kernel: string;
  readonly C: number;
  readonly gamma: number | null;
  readonly degree: number | null;
  readonly scale: string;
  readonly formulation: string | null;
}

export interface RevisionRow {
  readonly number: number;
  readonly kind: string;
  readonly note: string;
  readonly changeCount: number;
  readonly createdAt: string;
  readonly createdBy: string | null;
  readonly fit: {
    readonly id: string;
    readonly pass: string | null;
    readonly samples: number | null;
    readonly accuracy: number | null;
    readonly oofAccuracy: number | null;
    readonly settings: FitSettingsSummary;
  } | null;
  readonly boundaries: readonly BoundaryMetrics[];
  /** settings that differ from the previous fitted revision's fit (empty: comparable) */
  readonly settingsChanged: readonly string[];
}

export interface Timeline {
  readonly projectName: string;
  readonly classes: readonly string[];
  readonly currentRevision: number;
  readonly boundaryNames: readonly string[];
  readonly revisions: readonly RevisionRow[];
}

type Json = Record<string, unknown>;

function obj(v: unknown): Json {
  return v !== null && typeof v === 'object' && !Array.isArray(v) ? (v as Json) : {};
}
function numOrNull(v: unknown): number | null {
  return typeof v === 'number' && Number.isFinite(v) ? v : null;
}
function str(v: unknown): string | null {
  return typeof v === 'string' ? v : null;
}
export function parseJson(text: string | null): Json {
  if (!text) return {};
  try {
    return obj(JSON.parse(text));
  } catch {
    return {};
  }
}

/** Verdict words from a stored boundary's `separable` (true / false / null). */
export function verdictOf(b: Json): HardMarginVerdict {
  if (b.separable === true) return 'separable';
  if (b.separable === false) return 'not separable';
  return 'not decided';
}

/** The settings that decide whether two fits' margins can be compared. */
export function settingsSummary(settingsJson: string, metrics: Json): FitSettingsSummary {
  const s = readProjectSettings(settingsJson);
  const sel = obj(metrics.selection);
  const kernel = str(metrics.kernel) ?? s.kernel;
  const C = numOrNull(sel.C) ?? numOrNull(metrics.C) ?? s.C;
  const gamma = kernel === 'linear' ? null : (numOrNull(sel.gamma) ?? s.gamma);
  return { kernel, C, gamma, degree: kernel === 'poly' ? s.degree : null, scale: str(metrics.scale) ?? s.scale, formulation: str(metrics.formulation) };
}

/** Names of the settings that differ (kernel, C, gamma, degree, scaling, formulation). */
export function settingsDiff(a: FitSettingsSummary, b: FitSettingsSummary): string[] {
  const out: string[] = [];
  if (a.kernel !== b.kernel) out.push('kernel');
  if (a.C !== b.C) out.push('C');
  if (a.gamma !== b.gamma) out.push('gamma');
  if (a.degree !== b.degree) out.push('degree');
  if (a.scale !== b.scale) out.push('scaling');
  if (a.formulation !== b.formulation) out.push('formulation');
  return out;
}

/** Per-boundary out-of-fold accuracy from a fit's standings; null when the standings are gone. */
async function oofAccuracyPerBoundary(client: Db, projectId: string, fitId: string, revision: number, boundaries: readonly Json[]): Promise<(number | null)[] | null> {
  const standings = await client.standing.findMany({ where: { fitId }, select: { sampleId: true, detail: true } });
  if (standings.length === 0) return null;
  const labels = await labelsAtRevision(client, projectId, revision);
  const hits = boundaries.map(() => 0);
  const seen = boundaries.map(() => 0);
  for (const s of standings) {
    const d = unpackDetail(s.detail);
    const label = labels.get(s.sampleId);
    if (!d || label === undefined) continue;
    boundaries.forEach((b, k) => {
      const oof = d.oofDecision[k];
      if (oof === null || oof === undefined) return;
      const y = label === b.positive ? 1 : -1;
      seen[k]++;
      if ((oof >= 0 ? 1 : -1) === y) hits[k]++;
    });
  }
  return seen.map((n, k) => (n > 0 ? hits[k] / n : null));
}

/** The timeline of a project of the caller's team; null when not there. */
export async function revisionTimeline(client: Db, scope: TeamScope, projectId: string): Promise<Timeline | null> {
  const project = await scopedProject(client, scope.teamId, projectId);
  if (!project) return null;
  const [revisions, fits] = await Promise.all([
    client.revision.findMany({
      where: { projectId },
      orderBy: { number: 'asc' },
      select: { number: true, kind: true, note: true, changeCount: true, createdAt: true, createdBy: { select: { name: true } } },
    }),
    client.fit.findMany({
      where: { projectId, status: 'done' },
      orderBy: [{ revisionNumber: 'asc' }, { createdAt: 'asc' }],
      select: { id: true, revisionNumber: true, settings: true, metrics: true },
    }),
  ]);
  const chosen = new Map<number, { id: string; settings: string; metrics: Json }>();
  for (const f of fits) {
    const metrics = parseJson(f.metrics);
    const prev = chosen.get(f.revisionNumber);
    // later rows are newer; a full pass beats a quick one
    if (!prev || metrics.pass === 'full' || prev.metrics.pass !== 'full') chosen.set(f.revisionNumber, { id: f.id, settings: f.settings, metrics });
  }
  const boundaryNames: string[] = [];
  const rows: RevisionRow[] = [];
  let previous: FitSettingsSummary | null = null;
  for (const r of revisions) {
    const fit = chosen.get(r.number) ?? null;
    let boundaries: BoundaryMetrics[] = [];
    let settingsChanged: string[] = [];
    let fitView: RevisionRow['fit'] = null;
    if (fit) {
      const stored = Array.isArray(fit.metrics.boundaries) ? fit.metrics.boundaries.map(obj) : [];
      const oof = await oofAccuracyPerBoundary(client, projectId, fit.id, r.number, stored);
      boundaries = stored.map((b, k) => ({
        name: str(b.name) ?? `boundary ${k + 1}`,
        positive: str(b.positive) ?? '',
        marginWidth: numOrNull(b.marginWidth),
        wNorm: numOrNull(b.wNorm),
        hardMargin: verdictOf(b),
        supportVectors: numOrNull(b.supportVectors),
        wrongSide: numOrNull(b.wrongSide),
        insideMargin: numOrNull(b.insideMargin),
        hingeLoss: numOrNull(b.hingeLoss),
        oofAccuracy: oof ? oof[k] : null,
      }));
      for (const b of boundaries) if (!boundaryNames.includes(b.name)) boundaryNames.push(b.name);
      const summary = settingsSummary(fit.settings, fit.metrics);
      if (previous) settingsChanged = settingsDiff(previous, summary);
      previous = summary;
      fitView = {
        id: fit.id,
        pass: str(fit.metrics.pass),
        samples: numOrNull(fit.metrics.samples),
        accuracy: numOrNull(fit.metrics.accuracy),
        oofAccuracy: numOrNull(fit.metrics.oofAccuracy),
        settings: summary,
      };
    }
    rows.push({
      number: r.number,
      kind: r.kind,
      note: r.note,
      changeCount: r.changeCount,
      createdAt: r.createdAt.toISOString(),
      createdBy: r.createdBy?.name ?? null,
      fit: fitView,
      boundaries,
      settingsChanged,
    });
  }
  return { projectName: project.name, classes: project.classes.map((c) => c.name), currentRevision: project.currentRevision, boundaryNames, revisions: rows };
}

/**
 * The refit job body, shared by every FitJobQueue implementation (see jobs.ts for the contract).
 *
 *   processProject(db, projectId, options)  runs at most one fit of the project and returns it
 *
 * 1. Claim (project row locked): nothing happens while the project has a running fit. Of the
 *    queued fits the newest — highest revision, then latest request — becomes `running`; older
 *    queued fits are marked `superseded` (coalescing: a burst of revisions gives one fit).
 * 2. Input: the samples as they were at the fit's revision (features from the in-memory matrix,
 *    labels replayed from the label history), settings from the fit's snapshot.
 * 3. Engine, in a worker thread, warm-started from the duals of the newest finished fit with the
 *    same kernel, C, γ, scaling and solver:
 *    - full pass: fit + pivots + stratified k-fold out-of-fold margins (+ model selection when the
 *      project asks for it);
 *    - quick pass, for large projects (rows × features > QUICK_PASS_CELLS) that already have a full
 *      pass with the same settings: the warm-started fit only; out-of-fold decision values and
 *      pivot influence are carried over from that full pass (each sample's out-of-fold margin is
 *      recomputed for its current label). A full pass of the same revision is queued right after;
 *      it is cancelled when a newer revision arrives, so relabels never wait behind it.
 * 4. Complete (project row locked): if a fit of the project with a newer (revision, request time)
 *    has already completed, this one is marked `superseded` and nothing of it is written. Otherwise
 *    status `done`, metrics, model and formulation are written and the queue is rebuilt from it in
 *    the same transaction.
 * 5. Standings are then inserted in batches; `progress` reaches 1 when they are all stored (a done
 *    fit with progress < 1 is current for the queue but its standings are still being written).
 */
import { readProjectSettings, type ProjectSettings } from '../../domain-queue';
import { suspicionScore, type AuditResult } from '../../margin/audit';
import { boundaryLabels, warmStartFrom, type FitResult, type FitSettings, type LabelledData, type WarmBoundary, type WarmStart } from '../../margin/model';
import { flagNames, supportKindName } from '../../margin/standings';
import type { WorkerProgress } from '../../margin/run-in-worker';
import { FitCancelledError } from '../../margin/types';
import type { Db, DbTx } from '../db';
import { rebuildQueueTx, refreshQueueStatistics, type QueueCandidate, type RebuildSummary } from '../queue/build';
import { systemClock, type Clock } from '../queue/context';
import { providerOf, serialWrite, writeTx } from '../queue/tx';
import { fitInput, yieldToEventLoop } from './data';
import type { EngineRunner } from './engine';
import { decodeModel, encodeModel, type DecodedModel } from './model-codec';
import { fitsToPrune } from './standings-store';
import { inlineStandingsWriter, type StandingColumns, type StandingsWriter } from './standings-writer';

/** Projects larger than this (rows × features) get quick passes between full passes. */
export const QUICK_PASS_CELLS = 4_000_000;
/** Samples above which `solver: auto` picks dual coordinate descent for the linear kernel. */
export const AUTO_DCD_ROWS = 1000;

export type FitPass = 'full' | 'quick';

export interface FitSnapshot {
  readonly settings: ProjectSettings;
  /** set on the full pass queued after a quick pass */
  readonly followUp: boolean;
}

export function readSnapshot(json: string): FitSnapshot {
  let followUp = false;
  try {
    const raw: unknown = JSON.parse(json);
    followUp = raw !== null && typeof raw === 'object' && (raw as { followUp?: unknown }).followUp === true;
  } catch {
    followUp = false;
  }
  return { settings: readProjectSettings(json), followUp };
}

export interface ProcessOptions {
  readonly engine: EngineRunner;
  readonly clock?: Clock;
  /** aborts the engine (the fit is then marked cancelled) */
  readonly signal?: AbortSignal;
  /** called once the fit is claimed (the in-process queue uses it to know what is running) */
  readonly onClaim?: (fit: { id: string; revisionNumber: number; followUp: boolean }) => void;
  /** queue a full pass after a quick one (default true) */
  readonly followUp?: boolean;
  /** where standings go (default: batched inserts through `db`) */
  readonly standingsWriter?: StandingsWriter;
  /** a queued follow-up full pass waits until the newest revision is this old (default 60 s) */
  readonly followUpQuietMs?: number;
  /** rows × features above which quick passes are used (default QUICK_PASS_CELLS) */
  readonly quickPassCells?: number;
  /** called right after the completing transaction committed: the fit is current, its queue rebuilt */
  readonly onComplete?: (fit: { id: string; revisionNumber: number; pass: FitPass }) => void;
  readonly log?: (line: string) => void;
  /**
   * Several workers on one database (job-system mode): the claimed fit records the worker and a
   * heartbeat every `heartbeatMs`; a running fit whose heartbeat is older than `staleMs` belongs to
   * a stopped worker and is failed and queued again by the next claim. Without a lease (the
   * in-process queue, the only worker of its database), a running fit always blocks the claim.
   */
  readonly lease?: FitLease;
}

export interface FitLease {
  readonly workerId: string;
  readonly heartbeatMs: number;
  readonly staleMs: number;
}

export interface ProcessOutcome {
  readonly fitId: string;
  readonly revisionNumber: number;
  readonly status: 'done' | 'superseded' | 'failed' | 'cancelled';
  readonly pass: FitPass | null;
  readonly error?: string;
  readonly queue?: RebuildSummary;
  readonly timings?: Timings;
}

export interface Timings {
  loadMs: number;
  engineMs: number;
  completeMs: number;
  standingsMs: number;
  totalMs: number;
}

// ───────────────────────── settings → engine ─────────────────────────

export interface Chosen {
  readonly C: number;
  readonly gamma: number | null;
}

export function resolveSolver(s: ProjectSettings, rows: number): 'smo' | 'dcd' {
  if (s.solver !== 'auto') return s.solver;
  return s.kernel === 'linear' && rows > AUTO_DCD_ROWS ? 'dcd' : 'smo';
}

export function engineSettings(s: ProjectSettings, rows: number, cols: number, chosen: Chosen | null, scale: FitSettings['scale'] = s.scale): FitSettings {
  const gamma = chosen?.gamma ?? s.gamma ?? 1 / Math.max(1, cols);
  const kernel =
    s.kernel === 'linear'
      ? ({ type: 'linear' } as const)
      : s.kernel === 'rbf'
        ? ({ type: 'rbf', gamma } as const)
        : ({ type: 'poly', gamma, degree: s.degree, coef0: s.coef0 } as const);
  return {
    kernel,
    C: chosen?.C ?? s.C,
    solver: resolveSolver(s, rows),
    scale,
    seed: s.seed,
    nearBand: s.nearBand,
    pivotThreshold: s.pivotThreshold,
    pivotCap: s.pivotCap,
    folds: s.folds,
  };
}

/**
 * Fits whose duals can warm-start each other solve the same problem family. `scale` is the
 * project's scaling, as a stored model's header records it (an `l2` project is fitted by the
 * engine with scaling "none" on rows normalised here, and its model says `l2`).
 */
function warmKey(fs: FitSettings, scale: ProjectSettings['scale']): string {
  return JSON.stringify([fs.kernel, fs.C, fs.solver, scale]);
}

/** Out-of-fold values can be carried between fits with the same problem and the same folds. */
function carryKey(fs: FitSettings): string {
  return JSON.stringify([fs.kernel, fs.C, fs.solver, fs.scale, fs.folds, fs.seed]);
}

// ───────────────────────── in-memory state kept between fits ─────────────────────────

interface Carried {
  readonly fitId: string;
  readonly key: string;
  readonly classes: readonly string[];
  /** out-of-fold decision per boundary, by sample id */
  readonly oof: Map<string, Float64Array>;
  /** largest |relative margin-width change| when the sample is removed, by sample id */
  readonly pivotDelta: Map<string, number>;
  readonly chosen: Chosen | null;
}

interface WarmCache {
  readonly fitId: string;
  readonly key: string;
  readonly warm: WarmStart;
}

const memory = globalThis as typeof globalThis & {
  __borderlineCarried?: Map<string, Carried>;
  __borderlineWarm?: Map<string, WarmCache>;
};
const carriedStore = (): Map<string, Carried> => (memory.__borderlineCarried ??= new Map());
const warmStore = (): Map<string, WarmCache> => (memory.__borderlineWarm ??= new Map());

/** Forgets the in-memory warm starts and carried out-of-fold values (tests). */
export function resetFitMemory(): void {
  carriedStore().clear();
  warmStore().clear();
}

/**
 * One boundary of a warm start read back from a stored model: the duals, and — for linear DCD
 * models that carry their decision values and training classes — the previous solution too, so a
 * worker that did not run the previous fit starts its solver from it like the one that did.
 */
function warmBoundaryOf(b: DecodedModel['boundaries'][number], model: DecodedModel): WarmBoundary {
  const base = { positive: b.positive, negative: b.negative, alpha: b.alpha };
  const classIndex = model.classIndex;
  if (b.formulation !== 'dcd-regularised-bias' || !b.w || !b.decision || !classIndex) return base;
  const classes = model.header.classes;
  const y = boundaryLabels(Array.from(classIndex, (c) => classes[c]), b.positive);
  return { ...base, previous: { solution: { formulation: 'dcd-regularised-bias', w: b.w, b: b.b, alpha: b.alpha, decision: b.decision }, y } };
}

async function warmStartFor(db: Db, projectId: string, key: string): Promise<{ fitId: string; warm: WarmStart } | null> {
  const previous = await db.fit.findFirst({
    where: { projectId, status: 'done', model: { not: null } },
    orderBy: [{ revisionNumber: 'desc' }, { createdAt: 'desc' }, { id: 'desc' }],
    select: { id: true, settings: true, metrics: true },
  });
  if (!previous) return null;
  const cached = warmStore().get(projectId);
  if (cached && cached.fitId === previous.id) return cached.key === key ? { fitId: cached.fitId, warm: cached.warm } : null;
  const row = await db.fit.findUnique({ where: { id: previous.id }, select: { model: true } });
  if (!row?.model) return null;
  try {
    const model = decodeModel(row.model);
    const prevKey = JSON.stringify([model.header.kernel, model.header.C, model.header.solver, model.header.scale]);
    const warm: WarmStart = { ids: model.header.sampleIds, boundaries: model.boundaries.map((b) => warmBoundaryOf(b, model)) };
    warmStore().set(projectId, { fitId: previous.id, key: prevKey, warm });
    return prevKey === key ? { fitId: previous.id, warm } : null;
  } catch {
    return null;
  }
}

interface StoredMetrics {
  readonly pass?: FitPass;
  readonly carryKey?: string;
  readonly classes?: string[];
  readonly selection?: { C: number; gamma: number | null } | null;
}

function parseMetrics(json: string | null): StoredMetrics {
  if (!json) return {};
  try {
    const v: unknown = JSON.parse(json);
    return v !== null && typeof v === 'object' ? (v as StoredMetrics) : {};
  } catch {
    return {};
  }
}

/** The carried out-of-fold values of the project's newest full pass with `key` (memory, else its model). */
async function carriedFor(db: Db, projectId: string, key: string): Promise<Carried | null> {
  const fits = await db.fit.findMany({
    where: { projectId, status: 'done', model: { not: null } },
    orderBy: [{ revisionNumber: 'desc' }, { createdAt: 'desc' }],
    take: 20,
    select: { id: true, metrics: true },
  });
  const full = fits.find((f) => {
    const m = parseMetrics(f.metrics);
    return m.pass === 'full' && m.carryKey === key && Array.isArray(m.classes);
  });
  if (!full) return null;
  // Another worker process may have completed a newer full pass: trust the memory only for the newest.
  const hit = carriedStore().get(projectId);
  if (hit && hit.key === key && hit.fitId === full.id) return hit;
  const row = await db.fit.findUnique({ where: { id: full.id }, select: { model: true } });
  if (!row?.model) return null;
  let decoded;
  try {
    decoded = decodeModel(row.model);
  } catch {
    return null;
  }
  if (!decoded.audit) return null;
  const m = parseMetrics(full.metrics);
  const ids = decoded.header.sampleIds;
  const oof = new Map<string, Float64Array>();
  const pivotDelta = new Map<string, number>();
  const B = decoded.audit.oof.length;
  for (let i = 0; i < ids.length; i++) {
    const v = new Float64Array(B);
    for (let k = 0; k < B; k++) v[k] = decoded.audit.oof[k][i];
    oof.set(ids[i], v);
    if (decoded.audit.pivotDelta[i] !== 0) pivotDelta.set(ids[i], decoded.audit.pivotDelta[i]);
  }
  const carried: Carried = { fitId: full.id, key, classes: m.classes ?? [], oof, pivotDelta, chosen: m.selection ?? null };
  carriedStore().set(projectId, carried);
  return carried;
}

/**
 * Reads into this process's memory what a refit of the project loads before its engine runs —
 * features and labels at the current revision (with L2-normalised rows where the project scales
 * so), the newest warm start and the carried held-out values — so that a worker that just started
 * refits as quickly as one that has been running (lib/server/fits/warm.ts). Returns the rows read.
 */
export async function prepareProjectMemory(db: Db, projectId: string): Promise<number> {
  const project = await db.project.findUnique({ where: { id: projectId }, select: { currentRevision: true, settings: true } });
  if (!project) return 0;
  const s = readProjectSettings(project.settings);
  const l2 = s.scale === 'l2';
  const { input } = await fitInput(db, projectId, project.currentRevision, { l2 });
  const n = input.sampleIds.length;
  if (n === 0) return 0;
  const engineScale: FitSettings['scale'] = l2 ? 'none' : s.scale;
  const carried = await carriedFor(db, projectId, carryKey(engineSettings(s, n, input.cols, null, engineScale)));
  const chosen = s.autoSelect ? (carried?.chosen ?? null) : null;
  await warmStartFor(db, projectId, warmKey(engineSettings(s, n, input.cols, chosen, engineScale), s.scale));
  return n;
}

// ───────────────────────── per-sample records ─────────────────────────

interface SampleRecords {
  /** suspicion per sample (fit order) */
  readonly suspicion: Float64Array;
  /** out-of-fold margin per sample (NaN when not known) */
  readonly oofMargin: Float64Array;
  /** out-of-fold decision per boundary and sample (NaN when not known) */
  readonly oofDecision: readonly Float64Array[];
  readonly candidates: QueueCandidate[];
  readonly scoreOf: (sampleId: string) => { suspicion: number; reasons: string[] } | null;
  readonly oofAccuracy: number | null;
  /** the standings of every sample as columns, for the standings writer */
  readonly columns: () => StandingColumns;
}

function pivotDeltas(fit: FitResult): Float64Array {
  const delta = new Float64Array(fit.ids.length);
  for (const b of fit.boundaries) {
    for (const e of b.pivots?.computed ?? []) {
      if (Math.abs(e.relativeDelta) > Math.abs(delta[e.index])) delta[e.index] = e.relativeDelta;
    }
  }
  return delta;
}

/** Out-of-fold margin for a label from per-boundary decisions (binary: y·f; multi: own − best other). */
function marginFrom(decisions: ArrayLike<number>, classes: readonly string[], label: string): { margin: number; predicted: number } {
  const own = classes.indexOf(label);
  if (decisions.length === 1) {
    const y = own === 1 ? 1 : -1;
    return { margin: y * decisions[0], predicted: decisions[0] > 0 ? 1 : 0 };
  }
  let best = 0;
  let bestOther = -Infinity;
  for (let k = 0; k < decisions.length; k++) {
    if (decisions[k] > decisions[best]) best = k;
    if (k !== own && decisions[k] > bestOther) bestOther = decisions[k];
  }
  return { margin: decisions[own] - bestOther, predicted: best };
}

function reasonsOf(flagMask: number, oofMargin: number): string[] {
  const reasons: string[] = flagNames(flagMask);
  if (oofMargin < 0) reasons.push('held-out-wrong-side');
  return reasons;
}

/**
 * Scores every sample (typed arrays, no per-sample objects except for queue candidates) so the
 * queue can be rebuilt at once; the Standing rows themselves are built later, batch by batch, by
 * the standings writer (`rowAt`).
 */
async function scoreSamples(fit: FitResult, audit: AuditResult | null, carried: Carried | null, threshold: number): Promise<SampleRecords> {
  const n = fit.ids.length;
  const B = fit.boundaries.length;
  const multi = B > 1;
  const scale = multi ? 0.5 : 1;
  const deltas = audit ? pivotDeltas(fit) : null;
  const suspicion = new Float64Array(n);
  const oofMargin = new Float64Array(n).fill(NaN);
  const oofDecision = Array.from({ length: B }, () => new Float64Array(n).fill(NaN));
  const candidates: QueueCandidate[] = [];
  let oofCorrect = 0;
  let oofCount = 0;
  const sameClasses = carried !== null && carried.classes.join('\u0000') === fit.classes.join('\u0000');
  for (let i = 0; i < n; i++) {
    if (i > 0 && i % 8192 === 0) await yieldToEventLoop();
    const id = fit.ids[i];
    let m = NaN;
    let predicted = -1;
    if (audit) {
      for (let k = 0; k < B; k++) oofDecision[k][i] = audit.outOfFold.decision[k][i];
      m = audit.outOfFold.margin[i];
      predicted = audit.outOfFold.predicted[i];
    } else if (sameClasses && carried) {
      const c = carried.oof.get(id);
      if (c && c.length === B) {
        for (let k = 0; k < B; k++) oofDecision[k][i] = c[k];
        const r = marginFrom(c, fit.classes, fit.labels[i]);
        m = r.margin;
        predicted = r.predicted;
      }
    }
    oofMargin[i] = m;
    if (!Number.isNaN(m)) {
      oofCount++;
      if (predicted === fit.classIndex[i]) oofCorrect++;
    }
    const inMargin = fit.samples.margin[i];
    const pd = deltas ? deltas[i] : (carried?.pivotDelta.get(id) ?? 0);
    suspicion[i] = audit
      ? audit.suspicion[i]
      : suspicionScore(scale * (Number.isNaN(m) ? inMargin : m), scale * inMargin, Number.isFinite(pd) ? pd : 2 * threshold, threshold);
    if (fit.samples.flags[i] !== 0 || m < 0) {
      candidates.push({ sampleId: id, suspicion: suspicion[i], reasons: reasonsOf(fit.samples.flags[i], m), label: fit.labels[i] });
    }
  }
  let index: Map<string, number> | null = null;
  const scoreOf = (sampleId: string) => {
    index ??= new Map(fit.ids.map((id, i) => [id, i]));
    const i = index.get(sampleId);
    return i === undefined ? null : { suspicion: suspicion[i], reasons: reasonsOf(fit.samples.flags[i], oofMargin[i]) };
  };
  const columns = (): StandingColumns => {
    const slack = new Float64Array(n);
    const support = new Uint8Array(n);
    const detail = new Float32Array(n * 2 * B);
    for (let i = 0; i < n; i++) {
      const st = fit.boundaries[multi ? fit.classIndex[i] : 0].standings;
      slack[i] = st.slack[i];
      support[i] = st.support[i];
      for (let k = 0; k < B; k++) {
        detail[i * 2 * B + 2 * k] = fit.boundaries[k].standings.decision[i];
        detail[i * 2 * B + 2 * k + 1] = Number.isNaN(oofMargin[i]) ? NaN : oofDecision[k][i];
      }
    }
    return {
      sampleIds: fit.ids,
      classes: fit.classes,
      margin: fit.samples.margin,
      distance: fit.samples.distance,
      slack,
      alpha: fit.samples.alpha,
      support,
      oofMargin,
      flags: fit.samples.flags,
      suspicion,
      predicted: fit.samples.predicted,
      detail,
      detailWidth: 2 * B,
    };
  };
  return { suspicion, oofMargin, oofDecision, candidates, scoreOf, oofAccuracy: oofCount > 0 ? oofCorrect / oofCount : null, columns };
}

// ───────────────────────── metrics ─────────────────────────

function num(v: number): number | null {
  return Number.isFinite(v) ? v : null;
}

function buildMetrics(
  fit: FitResult,
  extra: {
    pass: FitPass;
    carryKey: string;
    warmFromFitId: string | null;
    selection: Chosen | null;
    oofAccuracy: number | null;
    oofCarriedFrom: string | null;
    scale: string;
    rows: number;
    cols: number;
    candidates: number;
  },
): Record<string, unknown> {
  const B = fit.boundaries.length;
  let wrongSide = 0;
  let insideMargin = 0;
  let nearBoundary = 0;
  let pivot = 0;
  let any = 0;
  for (let i = 0; i < fit.ids.length; i++) {
    const f = fit.samples.flags[i];
    if (f & 1) wrongSide++;
    if (f & 2) insideMargin++;
    if (f & 4) nearBoundary++;
    if (f & 8) pivot++;
    if (f) any++;
  }
  let correct = 0;
  const confusion = fit.classes.map(() => fit.classes.map(() => 0));
  for (let i = 0; i < fit.ids.length; i++) {
    const p = fit.samples.predicted[i];
    confusion[fit.classIndex[i]][p]++;
    if (p === fit.classIndex[i]) correct++;
  }
  return {
    pass: extra.pass,
    carryKey: extra.carryKey,
    classes: fit.classes,
    samples: extra.rows,
    features: extra.cols,
    kernel: fit.settings.kernel,
    C: fit.settings.C,
    solver: fit.settings.solver,
    scale: extra.scale,
    preprocessing: extra.scale === 'l2' && fit.settings.scale === 'none' ? 'rows L2-normalised by the refit service' : 'by the engine',
    folds: fit.settings.folds,
    seed: fit.settings.seed,
    nearBand: fit.settings.nearBand,
    pivotThreshold: fit.settings.pivotThreshold,
    formulation: fit.boundaries[0]?.formulation ?? null,
    warmStarted: extra.warmFromFitId !== null,
    warmFromFitId: extra.warmFromFitId,
    selection: extra.selection,
    oofCarriedFrom: extra.oofCarriedFrom,
    accuracy: fit.ids.length ? correct / fit.ids.length : null,
    oofAccuracy: extra.oofAccuracy,
    confusion,
    flagged: { wrongSide, insideMargin, nearBoundary, pivot, any },
    queueCandidates: extra.candidates,
    boundaries: fit.boundaries.map((b) => {
      let hinge = 0;
      for (let i = 0; i < b.standings.slack.length; i++) hinge += b.standings.slack[i];
      return {
        name: b.name,
        positive: b.positive,
        negative: b.negative,
        formulation: b.formulation,
        b: num(b.solution.b),
        wNorm: num(b.wNorm),
        marginWidth: num(b.marginWidth),
        supportVectors: b.counts.support,
        free: b.counts.free,
        bound: b.counts.bound,
        wrongSide: b.counts.wrongSide,
        insideMargin: b.counts.insideMargin,
        nearBoundary: b.counts.nearBoundary,
        pivots: b.counts.pivot,
        pivotsComputed: b.pivots ? b.pivots.computed.length : 0,
        hingeLoss: num(hinge),
        iterations: b.solution.iterations,
        // how the solver started: cold, from the previous duals or from the previous solution (DCD)
        start: b.solution.start ?? null,
        converged: b.solution.converged,
        primalObjective: num(b.solution.primalObjective),
        dualObjective: num(b.solution.dualObjective),
        dualityGap: num(b.solution.dualityGap),
        maxKktViolation: num(b.solution.maxKktViolation),
        separable: b.separable,
        hardMargin: b.hardMargin,
      };
    }),
    boundaryCount: B,
  };
}

// ───────────────────────── progress ─────────────────────────

function progressMapper(pass: FitPass, withSelection: boolean): (p: WorkerProgress) => number | null {
  let boundary = 0;
  let boundaries = 1;
  return (p) => {
    const s = p.stage;
    if (!s) return null;
    const sel = withSelection ? 0.3 : 0;
    if (s.stage === 'grid') return (0.3 * (s.step - 1)) / Math.max(1, s.of);
    const rest = 1 - sel;
    const fitShare = pass === 'quick' ? 0.7 : 0.35;
    if (s.stage === 'fit') {
      boundary = s.step - 1;
      boundaries = s.of;
      return sel + rest * fitShare * (boundary / boundaries);
    }
    if (s.stage === 'pivots') return sel + rest * fitShare * ((boundary + s.step / Math.max(1, s.of)) / boundaries);
    if (s.stage === 'fold') return sel + rest * (fitShare + 0.5 * ((s.step - 1) / Math.max(1, s.of)));
    return null;
  };
}

// ───────────────────────── the job ─────────────────────────

/** A follow-up full pass waits until the project has had no new revision for this long. */
export const FOLLOW_UP_QUIET_MS = 60_000;

/** Fails a running fit left by a stopped worker and queues a copy of it (same revision and settings). */
async function requeueOrphanTx(
  tx: DbTx,
  projectId: string,
  orphan: { id: string; revisionId: string; revisionNumber: number; settings: string; workerId: string | null },
  now: Date,
  staleMs: number,
): Promise<void> {
  const copy = await tx.fit.create({
    data: { projectId, revisionId: orphan.revisionId, revisionNumber: orphan.revisionNumber, status: 'queued', settings: orphan.settings },
    select: { id: true },
  });
  await tx.fit.update({
    where: { id: orphan.id },
    data: {
      status: 'failed',
      finishedAt: now,
      error: `its worker${orphan.workerId ? ` (${orphan.workerId})` : ''} stopped answering for ${Math.round(staleMs / 1000)} s; run again as fit ${copy.id}`,
    },
  });
}

async function claim(db: Db, projectId: string, now: Date, quietMs: number, lease: FitLease | undefined) {
  return writeTx(db, [{ table: 'Project', id: projectId }], async (tx) => {
    const running = await tx.fit.findFirst({
      where: { projectId, status: 'running' },
      select: { id: true, revisionId: true, revisionNumber: true, settings: true, workerId: true, heartbeatAt: true, startedAt: true },
    });
    if (running) {
      const lastSign = running.heartbeatAt ?? running.startedAt;
      const orphaned = lease !== undefined && (lastSign === null || now.getTime() - lastSign.getTime() > lease.staleMs);
      if (!orphaned) return null;
      await requeueOrphanTx(tx, projectId, running, now, lease.staleMs);
    }
    const queued = await tx.fit.findMany({
      where: { projectId, status: 'queued' },
      orderBy: [{ revisionNumber: 'desc' }, { createdAt: 'desc' }, { id: 'desc' }],
      select: { id: true, revisionNumber: true, settings: true, createdAt: true },
    });
    if (queued.length === 0) return null;
    const [chosen, ...rest] = queued;
    if (readSnapshot(chosen.settings).followUp && quietMs > 0) {
      // Reviewers are still changing labels: a full pass now would be cancelled by the next apply.
      const latest = await tx.revision.findFirst({ where: { projectId }, orderBy: { number: 'desc' }, select: { createdAt: true } });
      if (latest && now.getTime() - latest.createdAt.getTime() < quietMs) return null;
    }
    if (rest.length > 0) {
      await tx.fit.updateMany({
        where: { id: { in: rest.map((r) => r.id) }, status: 'queued' },
        data: { status: 'superseded', finishedAt: now, error: `coalesced into the fit of revision ${chosen.revisionNumber}` },
      });
    }
    await tx.fit.update({
      where: { id: chosen.id },
      data: { status: 'running', startedAt: now, progress: 0, error: null, workerId: lease?.workerId ?? null, heartbeatAt: lease ? now : null },
    });
    return chosen;
  });
}

async function finishWithStatus(db: Db, fitId: string, status: 'failed' | 'cancelled', error: string, now: Date): Promise<void> {
  await serialWrite(db, () => db.fit.updateMany({ where: { id: fitId, status: 'running' }, data: { status, error: error.slice(0, 2000), finishedAt: now } }));
}

/** Runs at most one queued fit of the project. Returns null when there was nothing to run. */
export async function processProject(db: Db, projectId: string, options: ProcessOptions): Promise<ProcessOutcome | null> {
  const clock = options.clock ?? systemClock;
  const claimed = await claim(db, projectId, clock(), options.followUpQuietMs ?? FOLLOW_UP_QUIET_MS, options.lease);
  if (!claimed) return null;
  return runClaimedFit(db, projectId, claimed, options);
}

export interface ClaimedFit {
  readonly id: string;
  readonly revisionNumber: number;
  readonly settings: string;
  readonly createdAt: Date;
}

/**
 * Computes and completes a fit that is already `running` (claimed by `processProject`, or by another
 * worker's own claim). Exposed so that tests can reproduce two workers finishing out of order.
 */
export async function runClaimedFit(db: Db, projectId: string, claimed: ClaimedFit, options: ProcessOptions): Promise<ProcessOutcome> {
  const clock = options.clock ?? systemClock;
  const log = options.log ?? (() => {});
  const snapshot = readSnapshot(claimed.settings);
  options.onClaim?.({ id: claimed.id, revisionNumber: claimed.revisionNumber, followUp: snapshot.followUp });
  const started = performance.now();
  const fitId = claimed.id;
  const outcome = (status: ProcessOutcome['status'], pass: FitPass | null, error?: string): ProcessOutcome => ({
    fitId,
    revisionNumber: claimed.revisionNumber,
    status,
    pass,
    ...(error ? { error } : {}),
  });
  let lastWrite = 0;
  let writing: Promise<unknown> = Promise.resolve();
  const setProgress = (value: number, force = false) => {
    const now = Date.now();
    if (!force && now - lastWrite < 400) return;
    lastWrite = now;
    const v = Math.max(0, Math.min(0.99, value));
    writing = writing.then(() => serialWrite(db, () => db.fit.updateMany({ where: { id: fitId, status: 'running' }, data: { progress: v } }))).catch(() => {});
  };

  const heartbeat = options.lease ? startHeartbeat(db, fitId, options.lease, clock) : null;
  let pass: FitPass = 'full';
  try {
    // L2 scaling is applied here once per feature matrix (see l2NormalizedRows); the engine then
    // fits the normalised rows with scaling "none".
    const l2 = snapshot.settings.scale === 'l2';
    const { input } = await fitInput(db, projectId, claimed.revisionNumber, { l2 });
    const engineScale: FitSettings['scale'] = l2 ? 'none' : snapshot.settings.scale;
    const preprocessorOverride = l2 ? { kind: 'l2' as const, cols: input.cols, mean: null, scale: null, zeroVarianceColumns: [], zeroNormRows: 0 } : undefined;
    const n = input.sampleIds.length;
    const d = input.cols;
    if (new Set(input.labels).size < 2) {
      await finishWithStatus(db, fitId, 'failed', 'A fit needs samples of at least two classes.', clock());
      return outcome('failed', null, 'A fit needs samples of at least two classes.');
    }
    const s = snapshot.settings;
    const baseSettings = engineSettings(s, n, d, null, engineScale);
    const key = carryKey(baseSettings);
    const carried = await carriedFor(db, projectId, key);
    const large = n * d > (options.quickPassCells ?? QUICK_PASS_CELLS);
    pass = !snapshot.followUp && large && carried !== null ? 'quick' : 'full';
    let chosen: Chosen | null = s.autoSelect ? (carried?.chosen ?? null) : null;
    const data: LabelledData = { ids: input.sampleIds, labels: input.labels, X: { data: input.X, rows: n, cols: d } };
    const loadMs = performance.now() - started;

    const toFraction = progressMapper(pass, s.autoSelect && pass === 'full');
    const onProgress = (p: WorkerProgress) => {
      const f = toFraction(p);
      if (f !== null) setProgress(f);
    };
    const engineStart = performance.now();
    if (s.autoSelect && pass === 'full') {
      const sel = await options.engine.select(data, baseSettings, {}, onProgress, options.signal);
      chosen = { C: sel.best.C, gamma: sel.best.gamma };
    }
    const fitSettings = engineSettings(s, n, d, chosen, engineScale);
    const warm = await warmStartFor(db, projectId, warmKey(fitSettings, s.scale));
    const settingsWithWarm: FitSettings = warm ? { ...fitSettings, warmStart: warm.warm } : fitSettings;
    let fit: FitResult;
    let audit: AuditResult | null = null;
    if (pass === 'full') {
      audit = await options.engine.audit(data, settingsWithWarm, onProgress, options.signal);
      fit = audit.fit;
    } else {
      fit = await options.engine.fit(data, { ...settingsWithWarm, pivotCap: 0 }, onProgress, options.signal);
    }
    const engineMs = performance.now() - engineStart;

    const records = await scoreSamples(fit, audit, pass === 'quick' ? carried : null, fit.settings.pivotThreshold);
    const metrics = buildMetrics(fit, {
      pass,
      carryKey: key,
      warmFromFitId: warm?.fitId ?? null,
      selection: chosen,
      oofAccuracy: records.oofAccuracy,
      oofCarriedFrom: pass === 'quick' ? (carried?.fitId ?? null) : null,
      scale: s.scale,
      rows: n,
      cols: d,
      candidates: records.candidates.length,
    });
    await writing;

    const completeStart = performance.now();
    const provider = providerOf(db);
    const completed = await writeTx(db, [{ table: 'Project', id: projectId }], async (tx) => {
      const now = clock();
      const me = await tx.fit.findUnique({ where: { id: fitId }, select: { status: true, createdAt: true } });
      if (!me || me.status !== 'running') return { kind: 'gone' as const };
      const newer = await tx.fit.findFirst({
        where: {
          projectId,
          status: 'done',
          id: { not: fitId },
          OR: [
            { revisionNumber: { gt: claimed.revisionNumber } },
            { revisionNumber: claimed.revisionNumber, createdAt: { gt: me.createdAt } },
          ],
        },
        select: { id: true, revisionNumber: true },
      });
      if (newer) {
        await tx.fit.update({
          where: { id: fitId },
          data: { status: 'superseded', finishedAt: now, error: `a fit of revision ${newer.revisionNumber} completed first` },
        });
        return { kind: 'superseded' as const };
      }
      const queue = await rebuildQueueTx(tx, {
        projectId,
        fitId,
        revisionNumber: claimed.revisionNumber,
        candidates: records.candidates,
        scoreOf: records.scoreOf,
        queueCap: s.queueCap,
        now,
        provider,
      });
      await tx.fit.update({
        where: { id: fitId },
        data: {
          status: 'done',
          progress: 0.99,
          finishedAt: now,
          formulation: fit.boundaries[0]?.formulation ?? null,
          metrics: JSON.stringify({ ...metrics, queue }),
          warmFromFitId: warm?.fitId ?? null,
        },
      });
      return { kind: 'done' as const, queue };
    });
    const completeMs = performance.now() - completeStart;
    if (completed.kind === 'gone') return outcome('cancelled', pass, 'the fit was stopped while it ran');
    if (completed.kind === 'superseded') {
      log(`fit ${fitId} (revision ${claimed.revisionNumber}) superseded by a newer completed fit`);
      return outcome('superseded', pass);
    }

    options.onComplete?.({ id: fitId, revisionNumber: claimed.revisionNumber, pass });
    await refreshQueueStatistics(db).catch((e: unknown) => log(`could not refresh the queue's statistics: ${e instanceof Error ? e.message : String(e)}`));

    // Remember what the next fits can reuse.
    warmStore().set(projectId, {
      fitId,
      key: warmKey(fitSettings, snapshot.settings.scale),
      // With each boundary's whole solution: the next refit of the same rows starts from it (model.ts WarmBoundary).
      warm: { ids: input.sampleIds, boundaries: warmStartFrom(fit).boundaries },
    });
    if (audit) {
      const oof = new Map<string, Float64Array>();
      const pivotDelta = new Map<string, number>();
      const deltas = pivotDeltas(fit);
      for (let i = 0; i < n; i++) {
        oof.set(input.sampleIds[i], Float64Array.from(audit.outOfFold.decision, (dec) => dec[i]));
        if (deltas[i] !== 0) pivotDelta.set(input.sampleIds[i], deltas[i]);
      }
      carriedStore().set(projectId, { fitId, key, classes: fit.classes, oof, pivotDelta, chosen });
    }

    const standingsStart = performance.now();
    // The serialised model (warm start for a later process, evaluation on new rows), then the
    // standings: both after the queue is refreshed, so neither delays it.
    const model = encodeModel(fit, input.sampleIds, preprocessorOverride, audit ? { oof: audit.outOfFold.decision, pivotDelta: pivotDeltas(fit) } : null);
    const writer = options.standingsWriter ?? inlineStandingsWriter(db);
    await writer.model(fitId, model);
    await writer.write(fitId, records.columns());
    await serialWrite(db, () => db.fit.update({ where: { id: fitId }, data: { progress: 1 } }));
    const standingsMs = performance.now() - standingsStart;
    try {
      await writer.prune(await fitsToPrune(db, projectId));
    } catch (e) {
      log(`could not prune old standings of project ${projectId}: ${e instanceof Error ? e.message : String(e)}`);
    }

    if (pass === 'quick' && options.followUp !== false) {
      await queueFollowUp(db, projectId, fitId, claimed.revisionNumber);
    }
    const timings: Timings = { loadMs, engineMs, completeMs, standingsMs, totalMs: performance.now() - started };
    log(
      `fit ${fitId} revision ${claimed.revisionNumber} ${pass}: ${n}×${d}, load ${loadMs.toFixed(0)} ms, engine ${engineMs.toFixed(0)} ms ` +
        `(started ${fit.boundaries.map((b) => b.solution.start ?? 'cold').join('/')}${warm ? ` from fit ${warm.fitId}` : ''}), ` +
        `queue ${completeMs.toFixed(0)} ms, standings ${standingsMs.toFixed(0)} ms`,
    );
    return { ...outcome('done', pass), queue: completed.queue, timings };
  } catch (e) {
    await writing;
    if (e instanceof FitCancelledError) {
      await finishWithStatus(db, fitId, 'cancelled', 'cancelled', clock());
      return outcome('cancelled', pass, 'cancelled');
    }
    const message = e instanceof Error ? `${e.name === 'EngineInputError' ? '' : `${e.name}: `}${e.message}` : String(e);
    log(`fit ${fitId} failed: ${message}`);
    await finishWithStatus(db, fitId, 'failed', message, clock());
    return outcome('failed', pass, message);
  } finally {
    heartbeat?.stop();
  }
}

/** Refreshes the running fit's heartbeat until stopped (job-system mode; see ProcessOptions.lease). */
function startHeartbeat(db: Db, fitId: string, lease: FitLease, clock: Clock): { stop(): void } {
  const timer = setInterval(() => {
    void serialWrite(db, () => db.fit.updateMany({ where: { id: fitId, status: 'running', workerId: lease.workerId }, data: { heartbeatAt: clock() } })).catch(
      () => {
        // A missed beat is harmless unless the database stays away longer than the lease.
      },
    );
  }, lease.heartbeatMs);
  timer.unref?.();
  return { stop: () => clearInterval(timer) };
}

/** After a quick pass: queue a full pass of the same revision unless newer work is waiting. */
async function queueFollowUp(db: Db, projectId: string, fitId: string, revisionNumber: number): Promise<void> {
  await writeTx(db, [{ table: 'Project', id: projectId }], async (tx) => {
    const waiting = await tx.fit.count({ where: { projectId, status: { in: ['queued', 'running'] } } });
    if (waiting > 0) return;
    const fit = await tx.fit.findUnique({ where: { id: fitId }, select: { revisionId: true, settings: true } });
    if (!fit) return;
    let snapshot: Record<string, unknown> = {};
    try {
      snapshot = JSON.parse(fit.settings) as Record<string, unknown>;
    } catch {
      snapshot = {};
    }
    await tx.fit.create({
      data: { projectId, revisionId: fit.revisionId, revisionNumber, status: 'queued', settings: JSON.stringify({ ...snapshot, followUp: true }) },
    });
  });
}


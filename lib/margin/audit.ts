/**
 * Out-of-fold margins and the suspicion score that orders the review queue.
 *
 * Why out-of-fold: a sample used to fit the boundary pulls the boundary towards itself (a
 * mislabelled point becomes a bound support vector and drags the hyperplane into its own margin), so
 * in-sample margins understate how badly a wrong label fits. Each sample is therefore also scored by a
 * model that never saw it: stratified, seeded k-fold (default 5); preprocessing is refitted on each
 * training part, exactly as for a full fit.
 *
 * The suspicion score of sample i, in [0, 1]:
 *
 *   suspicion = 0.6 · σ(−2·m_oof) + 0.3 · σ(−2·m_in) + 0.1 · p,      σ(t) = 1 / (1 + e^(−t))
 *
 * - m_oof: out-of-fold functional margin y·f(x) (multi-class: (own score − best other score) / 2,
 *   which equals y·f(x) when two classes score ±f(x)). The strongest evidence — a negative value
 *   means the sample sits on the wrong side of a boundary it did not help to place — so it carries
 *   the largest weight.
 * - m_in: in-sample functional margin of the full fit (multi-class: half the multi-class margin).
 *   The wrong-side and inside-margin flags the reviewer sees are thresholds of this value; using it
 *   continuously keeps the score consistent with the flags without hard jumps.
 * - p = |Δ| / (|Δ| + threshold), Δ the relative change of margin width when the sample is removed
 *   (pivots.ts; 0 for non-support vectors and for support vectors beyond the pivot cap). p = ½ exactly
 *   at the pivot threshold. A boundary that hinges on one sample makes that sample worth a look even
 *   when its label is right, but this is weaker evidence of a wrong label, hence the small weight.
 *
 * σ(−2m) maps the margin m = 1 (on the margin, correct side) to 0.12, m = 0 (on the boundary) to 0.5
 * and m = −1 to 0.88, and stays strictly decreasing beyond ±1, so deep wrong-side samples still rank
 * by depth. The score is bounded, monotone (non-increasing in both margins, non-decreasing in pivot
 * influence) and deterministic for a seed; ties are broken by id (code-unit order).
 */
import { stratifiedKFold } from './folds';
import { compareStrings } from './random';
import { selectRows } from './preprocess';
import {
  decisionFunction,
  fitMargins,
  multiclassFromScores,
  resolveSettings,
  validateData,
  type EngineControl,
  type FitResult,
  type FitSettings,
  type LabelledData,
} from './model';
import { FLAG_INSIDE_MARGIN, FLAG_NEAR_BOUNDARY, FLAG_WRONG_SIDE } from './standings';
import { FitCancelledError } from './types';

export const SUSPICION_WEIGHTS = { outOfFold: 0.6, inSample: 0.3, pivot: 0.1, slope: 2 } as const;

export interface OutOfFold {
  readonly folds: number;
  readonly seed: number;
  /** fold of every sample */
  readonly assignment: Int32Array;
  /** out-of-fold decision values, one array per boundary (same order as the fit's boundaries) */
  readonly decision: readonly Float64Array[];
  /** out-of-fold functional margin (binary y·f; multi-class: own − best other score) */
  readonly margin: Float64Array;
  /** out-of-fold predicted class index */
  readonly predicted: Int32Array;
  /** every fold fit converged */
  readonly converged: boolean;
}

export interface RankedSample {
  readonly id: string;
  readonly label: string;
  readonly suspicion: number;
  readonly reasons: string[];
}

export interface AuditResult {
  /** every sample, most suspicious first (ties by id) */
  readonly ranking: RankedSample[];
  /** suspicion per sample in data order */
  readonly suspicion: Float64Array;
  readonly outOfFold: OutOfFold;
  /** the full (in-sample) fit, with standings and pivots */
  readonly fit: FitResult;
  readonly weights: typeof SUSPICION_WEIGHTS;
}

function sigmoid(t: number): number {
  return t >= 0 ? 1 / (1 + Math.exp(-t)) : Math.exp(t) / (1 + Math.exp(t));
}

/** The suspicion score for one sample (see the module comment). Margins are on the binary y·f scale. */
export function suspicionScore(oofMargin: number, inSampleMargin: number, pivotRelativeDelta: number, pivotThreshold: number): number {
  const { outOfFold, inSample, pivot, slope } = SUSPICION_WEIGHTS;
  const d = Math.abs(pivotRelativeDelta);
  const p = d > 0 ? d / (d + Math.max(pivotThreshold, 1e-12)) : 0;
  return outOfFold * sigmoid(-slope * oofMargin) + inSample * sigmoid(-slope * inSampleMargin) + pivot * p;
}

/** Out-of-fold decision values with stratified, seeded k-fold. */
export function outOfFoldDecisions(data: LabelledData, settings: FitSettings, control: EngineControl = {}): OutOfFold {
  const s = resolveSettings(settings);
  const classes = validateData(data);
  const k = s.folds;
  const { folds, assignment } = stratifiedKFold(data.labels, k, s.seed);
  const n = data.ids.length;
  const nb = classes.length === 2 ? 1 : classes.length;
  const decision = Array.from({ length: nb }, () => new Float64Array(n));
  let converged = true;
  const foldSettings: FitSettings = { ...settings, pivotCap: 0, warmStart: undefined };
  folds.forEach((fold, f) => {
    if (control.signal?.aborted) throw new FitCancelledError();
    control.onStage?.({ stage: 'fold', step: f + 1, of: k, label: `fold ${f + 1} of ${k}` });
    const train: LabelledData = {
      ids: Array.from(fold.train, (i) => data.ids[i]),
      labels: Array.from(fold.train, (i) => data.labels[i]),
      X: selectRows(data.X, fold.train),
    };
    const result = fitMargins(train, foldSettings, { signal: control.signal, onProgress: control.onProgress, progressEvery: control.progressEvery });
    for (const b of result.boundaries) if (!b.solution.converged && b.hardMargin === null) converged = false;
    const scores = decisionFunction(result, selectRows(data.X, fold.test));
    scores.forEach((sc, b) => fold.test.forEach((i, r) => (decision[b][i] = sc[r])));
  });
  const classIndex = new Int32Array(n);
  const pos = new Map(classes.map((c, i) => [c, i]));
  for (let i = 0; i < n; i++) classIndex[i] = pos.get(data.labels[i]) as number;
  let margin: Float64Array;
  let predicted: Int32Array;
  if (nb === 1) {
    margin = new Float64Array(n);
    predicted = new Int32Array(n);
    for (let i = 0; i < n; i++) {
      const y = classIndex[i] === 1 ? 1 : -1;
      margin[i] = y * decision[0][i];
      predicted[i] = decision[0][i] > 0 ? 1 : 0;
    }
  } else {
    const mc = multiclassFromScores(decision, classIndex);
    margin = mc.margin;
    predicted = mc.predicted;
  }
  return { folds: k, seed: s.seed, assignment, decision, margin, predicted, converged };
}

function fmt(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  const r = Math.round(v * 100) / 100;
  return (r === 0 ? 0 : r).toFixed(2);
}

/**
 * Fits the full model (standings, pivots) and the out-of-fold models, scores every sample and ranks
 * them for review.
 */
export function auditSamples(data: LabelledData, settings: FitSettings, control: EngineControl = {}): AuditResult {
  const fit = fitMargins(data, settings, control);
  const oof = outOfFoldDecisions(data, settings, control);
  const n = data.ids.length;
  const multi = fit.boundaries.length > 1;
  const scale = multi ? 0.5 : 1;
  // Largest |relative Δ width| per sample over all boundaries, with its boundary.
  const pivotDelta = new Float64Array(n);
  const pivotBoundary = new Int32Array(n).fill(-1);
  fit.boundaries.forEach((b, bi) => {
    for (const e of b.pivots?.computed ?? []) {
      if (Math.abs(e.relativeDelta) > Math.abs(pivotDelta[e.index])) {
        pivotDelta[e.index] = e.relativeDelta;
        pivotBoundary[e.index] = bi;
      }
    }
  });
  const threshold = fit.settings.pivotThreshold;
  const suspicion = new Float64Array(n);
  const ranking: RankedSample[] = [];
  for (let i = 0; i < n; i++) {
    const mOof = oof.margin[i];
    const mIn = fit.samples.margin[i];
    const score = suspicionScore(scale * mOof, scale * mIn, pivotDelta[i], threshold);
    suspicion[i] = score;
    const reasons: string[] = [];
    if (multi && oof.predicted[i] !== fit.classIndex[i]) {
      reasons.push(`held out, scored highest for "${fit.classes[oof.predicted[i]]}" (out-of-fold margin ${fmt(mOof)})`);
    } else if (mOof < 0) {
      reasons.push(`wrong side when held out (out-of-fold margin ${fmt(mOof)})`);
    } else if (mOof < (multi ? 2 : 1)) {
      reasons.push(`inside the margin when held out (out-of-fold margin ${fmt(mOof)})`);
    }
    if (!multi) {
      const flags = fit.samples.flags[i];
      if (flags & FLAG_WRONG_SIDE) reasons.push(`wrong side of the fitted boundary (margin ${fmt(mIn)})`);
      else if (flags & FLAG_INSIDE_MARGIN) reasons.push(`inside the margin (margin ${fmt(mIn)})`);
      if (flags & FLAG_NEAR_BOUNDARY) reasons.push(`near the boundary (distance ${fmt(fit.samples.distance[i])})`);
    } else {
      if (fit.samples.predicted[i] !== fit.classIndex[i]) {
        reasons.push(`the fitted model scores "${fit.classes[fit.samples.predicted[i]]}" highest (multi-class margin ${fmt(mIn)})`);
      }
      const wrong: string[] = [];
      const inside: string[] = [];
      const near: string[] = [];
      for (const b of fit.boundaries) {
        const f = b.standings.flags[i];
        if (f & FLAG_WRONG_SIDE) wrong.push(`${b.name} (margin ${fmt(b.standings.margin[i])})`);
        else if (f & FLAG_INSIDE_MARGIN) inside.push(`${b.name} (margin ${fmt(b.standings.margin[i])})`);
        if (f & FLAG_NEAR_BOUNDARY) near.push(`${b.name} (distance ${fmt(b.standings.distance[i])})`);
      }
      if (wrong.length) reasons.push(`wrong side of ${wrong.join(', ')}`);
      if (inside.length) reasons.push(`inside the margin of ${inside.join(', ')}`);
      if (near.length) reasons.push(`near ${near.join(', ')}`);
    }
    if (Math.abs(pivotDelta[i]) > threshold) {
      const b = fit.boundaries[pivotBoundary[i]];
      const pct = (pivotDelta[i] * 100).toFixed(1);
      reasons.push(`pivot: removing it changes the margin width by ${pivotDelta[i] > 0 ? '+' : ''}${pct} %${multi ? ` (${b.name})` : ''}`);
    }
    ranking.push({ id: data.ids[i], label: data.labels[i], suspicion: score, reasons });
  }
  ranking.sort((a, b) => b.suspicion - a.suspicion || compareStrings(a.id, b.id));
  return { ranking, suspicion, outOfFold: oof, fit, weights: SUSPICION_WEIGHTS };
}

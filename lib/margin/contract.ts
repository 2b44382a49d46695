/**
 * The stable JSON contract of `borderline fit --json` and `borderline audit --json` (documented in
 * the README's CLI section). Numbers that are not finite (e.g. the margin width of a non-separable
 * hard-margin verdict) are written as null.
 *
 * fit, two classes:
 *   { "classes": [c0, c1],                       sorted; y = +1 means classes[1]
 *     "model": { "kernel", "C", "solver", "formulation", "scale", "b", "supportCount",
 *                "dualObjective", "primalObjective", "dualityGap", "maxKktViolation",
 *                "iterations", "converged", "separable", "marginWidth" },
 *     "samples": [ { "id", "label", "decision", "margin", "distance", "slack", "alpha",
 *                    "support", "flags": [...] } ] }            file order; margin = y·f(x)
 * fit, more than two classes (one-vs-rest): the same keys, plus
 *   model.boundaries: per class { "positive", "name", "b", "supportCount", ..., "marginWidth" };
 *   model.b = null; supportCount = samples that are support vectors of any boundary; objectives,
 *   gaps and iterations summed over boundaries (the problems are independent); converged = all
 *   converged; separable = true if all boundaries separate, false if a hard-margin verdict said no,
 *   else null; marginWidth = the smallest boundary width; model.confusion = [true][predicted] counts.
 *   Each sample: decision = own class's score, margin = own score − best other score (the
 *   multi-class margin), distance and alpha from its own class's boundary, flags = union over the
 *   boundaries, predicted = arg-max class, and boundaries: [{ "positive", "decision", "margin",
 *   "distance", "alpha", "flags" }].
 * audit:
 *   { "classes", "folds", "seed", "ranking": [ { "id", "label", "suspicion", "reasons": [...],
 *     "outOfFoldMargin" } ] }                    every sample, most suspicious first
 */
import type { AuditResult } from './audit';
import type { BoundaryResult, FitResult } from './model';
import { flagNames, supportKindName, type FlagName, type SupportKind } from './standings';
import type { KernelSpec } from './types';

type Num = number | null;

const num = (v: number): Num => (Number.isFinite(v) ? v : null);

export interface BoundaryJson {
  readonly positive: string;
  readonly negative: readonly string[];
  readonly name: string;
  readonly b: Num;
  readonly supportCount: number;
  readonly freeCount: number;
  readonly boundCount: number;
  readonly dualObjective: Num;
  readonly primalObjective: Num;
  readonly dualityGap: Num;
  readonly maxKktViolation: Num;
  readonly iterations: number;
  readonly converged: boolean;
  readonly separable: boolean | null;
  readonly marginWidth: Num;
  readonly wrongSideCount: number;
  readonly insideMarginCount: number;
  readonly nearBoundaryCount: number;
  readonly pivotCount: number;
  readonly pivotsComputed: number;
}

export interface ModelJson {
  readonly kernel: KernelSpec;
  readonly C: Num;
  readonly solver: string;
  readonly formulation: string;
  readonly hard: boolean;
  readonly scale: string;
  readonly tol: number;
  readonly b: Num;
  readonly supportCount: number;
  readonly dualObjective: Num;
  readonly primalObjective: Num;
  readonly dualityGap: Num;
  readonly maxKktViolation: Num;
  readonly iterations: number;
  readonly converged: boolean;
  readonly separable: boolean | null;
  readonly marginWidth: Num;
  readonly boundaries?: readonly BoundaryJson[];
  readonly confusion?: number[][];
}

export interface SampleJson {
  readonly id: string;
  readonly label: string;
  readonly decision: Num;
  readonly margin: Num;
  readonly distance: Num;
  readonly slack?: Num;
  readonly alpha: number;
  readonly support?: SupportKind;
  readonly flags: FlagName[];
  readonly predicted?: string;
  readonly boundaries?: readonly {
    readonly positive: string;
    readonly decision: Num;
    readonly margin: Num;
    readonly distance: Num;
    readonly alpha: number;
    readonly flags: FlagName[];
  }[];
}

export interface FitJson {
  readonly classes: readonly string[];
  readonly model: ModelJson;
  readonly samples: SampleJson[];
}

export interface AuditJson {
  readonly classes: readonly string[];
  readonly folds: number;
  readonly seed: number;
  readonly ranking: { readonly id: string; readonly label: string; readonly suspicion: number; readonly reasons: string[]; readonly outOfFoldMargin: Num }[];
}

export function boundaryJson(b: BoundaryResult): BoundaryJson {
  const s = b.solution;
  return {
    positive: b.positive,
    negative: b.negative,
    name: b.name,
    b: num(s.b),
    supportCount: b.counts.support,
    freeCount: b.counts.free,
    boundCount: b.counts.bound,
    dualObjective: num(s.dualObjective),
    primalObjective: num(s.primalObjective),
    dualityGap: num(s.dualityGap),
    maxKktViolation: num(s.maxKktViolation),
    iterations: s.iterations,
    converged: s.converged,
    separable: b.separable,
    marginWidth: num(b.marginWidth),
    wrongSideCount: b.counts.wrongSide,
    insideMarginCount: b.counts.insideMargin,
    nearBoundaryCount: b.counts.nearBoundary,
    pivotCount: b.counts.pivot,
    pivotsComputed: b.pivots?.computed.length ?? 0,
  };
}

export function fitJson(result: FitResult): FitJson {
  const st = result.settings;
  const bs = result.boundaries;
  const common = {
    kernel: st.kernel,
    C: st.hard ? null : st.C,
    solver: st.solver,
    formulation: bs[0].formulation,
    hard: st.hard,
    scale: st.scale,
    tol: st.tol,
  };
  let model: ModelJson;
  if (bs.length === 1) {
    const b = boundaryJson(bs[0]);
    model = {
      ...common,
      b: b.b,
      supportCount: b.supportCount,
      dualObjective: b.dualObjective,
      primalObjective: b.primalObjective,
      dualityGap: b.dualityGap,
      maxKktViolation: b.maxKktViolation,
      iterations: b.iterations,
      converged: b.converged,
      separable: b.separable,
      marginWidth: b.marginWidth,
    };
  } else {
    const per = bs.map(boundaryJson);
    const sum = (pick: (x: BoundaryJson) => Num): Num => {
      let t = 0;
      for (const x of per) {
        const v = pick(x);
        if (v === null) return null;
        t += v;
      }
      return t;
    };
    const anySv = new Set<number>();
    for (const b of bs) b.standings.alpha.forEach((a, i) => a > 0 && anySv.add(i));
    const widths = per.map((x) => x.marginWidth);
    model = {
      ...common,
      b: null,
      supportCount: anySv.size,
      dualObjective: sum((x) => x.dualObjective),
      primalObjective: sum((x) => x.primalObjective),
      dualityGap: sum((x) => x.dualityGap),
      maxKktViolation: per.some((x) => x.maxKktViolation === null) ? null : Math.max(...per.map((x) => x.maxKktViolation as number)),
      iterations: per.reduce((t, x) => t + x.iterations, 0),
      converged: per.every((x) => x.converged),
      separable: per.every((x) => x.separable === true) ? true : per.some((x) => x.separable === false) ? false : null,
      marginWidth: widths.includes(null) ? null : Math.min(...(widths as number[])),
      boundaries: per,
      confusion: result.multiclass?.confusion,
    };
  }
  const samples: SampleJson[] = result.ids.map((id, i) => {
    const base = {
      id,
      label: result.labels[i],
      decision: num(result.samples.decision[i]),
      margin: num(result.samples.margin[i]),
      distance: num(result.samples.distance[i]),
    };
    if (bs.length === 1) {
      const s = bs[0].standings;
      return {
        ...base,
        slack: num(s.slack[i]),
        alpha: s.alpha[i],
        support: supportKindName(s.support[i]),
        flags: flagNames(s.flags[i]),
      };
    }
    return {
      ...base,
      alpha: result.samples.alpha[i],
      flags: flagNames(result.samples.flags[i]),
      predicted: result.classes[result.samples.predicted[i]],
      boundaries: bs.map((b) => ({
        positive: b.positive,
        decision: num(b.standings.decision[i]),
        margin: num(b.standings.margin[i]),
        distance: num(b.standings.distance[i]),
        alpha: b.standings.alpha[i],
        flags: flagNames(b.standings.flags[i]),
      })),
    };
  });
  return { classes: result.classes, model, samples };
}

export function auditJson(result: AuditResult): AuditJson {
  const index = new Map(result.fit.ids.map((id, i) => [id, i]));
  return {
    classes: result.fit.classes,
    folds: result.outOfFold.folds,
    seed: result.outOfFold.seed,
    ranking: result.ranking.map((r) => ({
      id: r.id,
      label: r.label,
      suspicion: r.suspicion,
      reasons: r.reasons,
      outOfFoldMargin: num(result.outOfFold.margin[index.get(r.id) as number]),
    })),
  };
}

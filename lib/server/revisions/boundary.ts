/**
 * Data of the Boundary screen for one boundary (one-vs-rest) of a project's newest fit that still
 * has standings: every sample's signed distance f_k(x)/‖w_k‖ (from the decision values stored in
 * Standing.detail), its position on the vertical axis (lib/projection.ts), its label at the fit's
 * revision and the flags for this boundary, plus the margin band ±1/‖w_k‖.
 *
 * Inputs are decoded from Sample.features and preprocessed with the model's own preprocessor, so
 * the vertical direction lives in the space the boundary was trained in.
 */
import { boundaryPicture } from '../../projection';
import type { Preprocessor, ScaleKind } from '../../margin/preprocess';
import { applyPreprocessor } from '../../margin/preprocess';
import type { TeamScope } from '../authz/scope';
import type { Db } from '../db';
import { decodeFeaturesInto } from '../features';
import { decodeModel } from '../fits/model-codec';
import { unpackDetail } from '../fits/standings-store';
import { labelsAtRevision, scopedProject } from './labels';
import { parseJson } from './timeline';

/** Bits of BoundaryPoint.f for the chosen boundary. */
export const PF_WRONG_SIDE = 1;
export const PF_INSIDE_MARGIN = 2;
export const PF_NEAR = 4;
export const PF_PIVOT = 8;

export interface BoundaryPoint {
  /** Sample.id */
  readonly id: string;
  /** external id */
  readonly e: string;
  /** class index (label at the fit's revision) */
  readonly c: number;
  /** signed distance */
  readonly x: number;
  /** vertical coordinate */
  readonly y: number;
  /** decision value f(x) */
  readonly d: number;
  /** flag bits for this boundary */
  readonly f: number;
}

export interface BoundaryData {
  readonly projectName: string;
  readonly revision: number;
  readonly currentRevision: number;
  readonly fitId: string;
  readonly classes: readonly string[];
  readonly boundaries: readonly { readonly index: number; readonly name: string; readonly positive: string }[];
  readonly boundary: number;
  /** [A, B] when a pair of classes is shown (A's score minus B's); null for one-vs-rest */
  readonly pair: readonly [string, string] | null;
  readonly positive: string;
  readonly kernel: string;
  readonly marginWidth: number | null;
  /** 1/‖w‖ */
  readonly band: number | null;
  readonly vertical: 'orthogonal-to-w' | 'input-pca';
  /** share of the (w-removed) variance along the vertical direction */
  readonly verticalShare: number;
  /** samples of this boundary (all of them are in the histogram) */
  readonly total: number;
  readonly wrongSide: number;
  readonly insideMargin: number;
  /** wrong side or inside the margin */
  readonly outlined: number;
  /** signed distance and class index of every sample */
  readonly histogram: { readonly x: readonly number[]; readonly c: readonly number[] };
  /** outlined samples, farthest from the boundary first (at most FLAGGED_LIMIT; y is 0) */
  readonly flagged: readonly BoundaryPoint[];
  /** the picture's points: every sample up to MAX_PICTURE_POINTS, else a subset (see boundaryData) */
  readonly points: readonly BoundaryPoint[];
}

/** Most points sent to the canvas picture (the histogram always counts every sample). */
export const MAX_PICTURE_POINTS = 20_000;
export const FLAGGED_LIMIT = 200;

export type BoundaryResult =
  | { readonly kind: 'ok'; readonly data: BoundaryData }
  | { readonly kind: 'no-fit'; readonly projectName: string; readonly currentRevision: number; readonly pending: boolean };

/**
 * Which boundary to show: one-vs-rest boundary k, or a pair of classes (multi-class fits). A pair
 * (A, B) shows only the samples labelled A or B against the rule "A's score beats B's":
 * g(x) = f_A(x) − f_B(x), a linear function with weights w_A − w_B for linear fits, so the signed
 * distance is g(x)/‖w_A − w_B‖. It was not trained as a margin classifier, so it has no margin
 * band; a sample is "wrong side" when the other class of the pair outscores its own. Kernel fits
 * show g(x) itself (no input-space weights).
 */
export type BoundaryChoice = { readonly kind: 'ovr'; readonly index: number } | { readonly kind: 'pair'; readonly a: string; readonly b: string };

/** null when the project is not the caller's team's. */
export async function boundaryData(
  client: Db,
  scope: TeamScope,
  projectId: string,
  choice: BoundaryChoice | number = 0,
  options: { maxPicturePoints?: number } = {},
): Promise<BoundaryResult | null> {
  const project = await scopedProject(client, scope.teamId, projectId);
  if (!project) return null;
  const fit = await client.fit.findFirst({
    where: { projectId, status: 'done', model: { not: null }, progress: { gte: 1 }, standings: { some: {} } },
    orderBy: [{ revisionNumber: 'desc' }, { createdAt: 'desc' }],
    select: { id: true, revisionNumber: true, model: true, metrics: true, settings: true },
  });
  if (!fit || !fit.model) {
    const pending = (await client.fit.count({ where: { projectId, status: { in: ['queued', 'running'] } } })) > 0;
    return { kind: 'no-fit', projectName: project.name, currentRevision: project.currentRevision, pending };
  }
  const model = decodeModel(fit.model);
  const metrics = parseJson(fit.metrics);
  const want: BoundaryChoice = typeof choice === 'number' ? { kind: 'ovr', index: choice } : choice;
  const byPositive = (c: string) => model.boundaries.findIndex((x) => x.positive === c);
  const pair =
    want.kind === 'pair' && model.boundaries.length > 2 && want.a !== want.b && byPositive(want.a) >= 0 && byPositive(want.b) >= 0
      ? { a: byPositive(want.a), b: byPositive(want.b) }
      : null;
  const k = pair ? pair.a : Math.min(Math.max(0, Math.trunc(want.kind === 'ovr' ? want.index : 0)), model.boundaries.length - 1);
  const b = model.boundaries[k];
  const rival = pair ? model.boundaries[pair.b] : null;
  const cols = model.preprocessor.cols;
  const [samples, standings, labels] = await Promise.all([
    client.sample.findMany({ where: { projectId }, orderBy: { externalId: 'asc' }, select: { id: true, externalId: true } }),
    client.standing.findMany({ where: { fitId: fit.id }, select: { sampleId: true, detail: true, flags: true } }),
    labelsAtRevision(client, projectId, fit.revisionNumber),
  ]);
  const standingOf = new Map(standings.map((s) => [s.sampleId, s] as const));
  const kept = samples.filter((s) => standingOf.has(s.id) && labels.has(s.id) && (!rival || labels.get(s.id) === b.positive || labels.get(s.id) === rival.positive));
  const n = kept.length;
  const decision = new Float64Array(n);
  kept.forEach((s, i) => {
    const d = unpackDetail(standingOf.get(s.id)?.detail ?? null);
    decision[i] = d ? (d.decision[k] ?? 0) - (pair ? (d.decision[pair.b] ?? 0) : 0) : 0;
  });
  let w = b.w ? Float64Array.from(b.w.subarray(0, cols)) : null;
  let wNorm = b.wNorm;
  if (rival) {
    if (w && rival.w) {
      // ‖w_A − w_B‖ over the full stored vectors (the same components as each boundary's ‖w‖)
      const full = b.w as Float64Array;
      const rw = rival.w;
      w = w.map((v, j) => v - rw[j]);
      let s2 = 0;
      for (let j = 0; j < Math.min(full.length, rw.length); j++) s2 += (full[j] - rw[j]) ** 2;
      wNorm = Math.sqrt(s2);
    } else {
      w = null;
      wNorm = NaN;
    }
  }
  const usable = Number.isFinite(wNorm) && wNorm > 0;
  // Project class order (ProjectClass.position), as on every other screen, so a class keeps its colour and shape.
  const classes = [...project.classes.map((c) => c.name)];
  for (const c of model.header.classes) if (!classes.includes(c)) classes.push(c);
  const nearBand = typeof metrics.nearBand === 'number' ? metrics.nearBand : 0.5;
  const cls = new Int32Array(n);
  const flags = new Int32Array(n);
  const dist = new Float64Array(n);
  kept.forEach((s, i) => {
    const label = labels.get(s.id) as string;
    if (!classes.includes(label)) classes.push(label);
    cls[i] = classes.indexOf(label);
    const m = (label === b.positive ? 1 : -1) * decision[i];
    let f = 0;
    if (m < 0) f |= PF_WRONG_SIDE;
    else if (!rival && m < 1 - 1e-3) f |= PF_INSIDE_MARGIN;
    if (!rival && Math.abs(decision[i]) <= nearBand) f |= PF_NEAR;
    if ((standingOf.get(s.id)?.flags ?? '').split(',').includes('pivot')) f |= PF_PIVOT;
    flags[i] = f;
    dist[i] = usable ? decision[i] / wNorm : decision[i];
  });

  // The picture: every sample up to `maxPicturePoints`; above that the outlined samples first (up
  // to half the budget), the rest evenly spaced. Features are read only for those rows.
  const cap = Math.max(1, options.maxPicturePoints ?? MAX_PICTURE_POINTS);
  let chosen: number[];
  if (n <= cap) chosen = Array.from({ length: n }, (_, i) => i);
  else {
    const outlined = Array.from({ length: n }, (_, i) => i).filter((i) => (flags[i] & 3) !== 0).slice(0, Math.floor(cap / 2));
    const taken = new Set(outlined);
    const rest = Array.from({ length: n }, (_, i) => i).filter((i) => !taken.has(i));
    const room = cap - outlined.length;
    const spaced: number[] = [];
    for (let q = 0; q < room && rest.length > 0; q++) spaced.push(rest[Math.floor((q * rest.length) / room)]);
    chosen = [...outlined, ...spaced].sort((x, y) => x - y);
  }
  const featureOf = new Map<string, Uint8Array>();
  for (let start = 0; start < chosen.length; start += 500) {
    const ids = chosen.slice(start, start + 500).map((i) => kept[i].id);
    for (const r of await client.sample.findMany({ where: { id: { in: ids } }, select: { id: true, features: true } })) featureOf.set(r.id, r.features);
  }
  const rows = chosen.filter((i) => featureOf.get(kept[i].id)?.byteLength === cols * 4);
  const raw = new Float64Array(rows.length * cols);
  rows.forEach((i, r) => decodeFeaturesInto(featureOf.get(kept[i].id) as Uint8Array, raw, r * cols));
  const p = model.header.preprocessor;
  const pre: Preprocessor = {
    kind: p.kind as ScaleKind,
    cols,
    mean: model.preprocessor.mean,
    scale: model.preprocessor.scale,
    zeroVarianceColumns: p.zeroVarianceColumns,
    zeroNormRows: p.zeroNormRows,
  };
  const X = applyPreprocessor(pre, { data: raw, rows: rows.length, cols });
  const picture = boundaryPicture(X, rows.map((i) => decision[i]), wNorm, w);
  const points: BoundaryPoint[] = rows.map((i, r) => ({ id: kept[i].id, e: kept[i].externalId, c: cls[i], x: picture.x[r], y: picture.y[r], d: decision[i], f: flags[i] }));
  const outlinedAll = Array.from({ length: n }, (_, i) => i).filter((i) => (flags[i] & 3) !== 0);
  const flagged = outlinedAll
    .sort((x, y) => Math.abs(dist[y]) - Math.abs(dist[x]))
    .slice(0, FLAGGED_LIMIT)
    .map((i) => ({ id: kept[i].id, e: kept[i].externalId, c: cls[i], x: dist[i], y: 0, d: decision[i], f: flags[i] }));
  let wrongSide = 0;
  let insideMargin = 0;
  for (let i = 0; i < n; i++) {
    if (flags[i] & PF_WRONG_SIDE) wrongSide++;
    if (flags[i] & PF_INSIDE_MARGIN) insideMargin++;
  }
  return {
    kind: 'ok',
    data: {
      projectName: project.name,
      revision: fit.revisionNumber,
      currentRevision: project.currentRevision,
      fitId: fit.id,
      classes,
      boundaries: model.boundaries.map((x, i) => ({ index: i, name: x.name, positive: x.positive })),
      boundary: k,
      pair: rival ? [b.positive, rival.positive] : null,
      positive: b.positive,
      kernel: model.header.kernel.type,
      marginWidth: rival ? null : b.marginWidth,
      band: rival ? null : picture.band,
      vertical: picture.vertical,
      verticalShare: picture.direction.share,
      total: n,
      wrongSide,
      insideMargin,
      outlined: outlinedAll.length,
      histogram: { x: Array.from(dist), c: Array.from(cls) },
      flagged,
      points,
    },
  };
}

export interface SampleDetail {
  readonly id: string;
  readonly externalId: string;
  readonly text: string | null;
  readonly originalLabel: string;
  readonly currentLabel: string;
  readonly changes: readonly { readonly revision: number; readonly from: string; readonly to: string }[];
}

/** One sample of a project of the caller's team (for the detail panel); null when not there. */
export async function sampleDetail(client: Db, scope: TeamScope, projectId: string, sampleId: string): Promise<SampleDetail | null> {
  const s = await client.sample.findFirst({
    where: { id: sampleId, projectId, project: { teamId: scope.teamId } },
    select: {
      id: true,
      externalId: true,
      text: true,
      originalLabel: true,
      currentLabel: true,
      labelChanges: { orderBy: { revisionNumber: 'asc' }, select: { revisionNumber: true, fromLabel: true, toLabel: true } },
    },
  });
  if (!s) return null;
  return {
    id: s.id,
    externalId: s.externalId,
    text: s.text,
    originalLabel: s.originalLabel,
    currentLabel: s.currentLabel,
    changes: s.labelChanges.map((c) => ({ revision: c.revisionNumber, from: c.fromLabel, to: c.toLabel })),
  };
}

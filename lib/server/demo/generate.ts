// The demo data set (DESIGN.md §7): invented customer messages of a support team, labelled
// refund / shipping / account / other, with synthetic 64-dimensional embeddings and 5 % planted
// label errors concentrated near the class boundaries. Pure and deterministic: the same options
// give the same data set on every machine (pure-rand xoroshiro128+, no global state).
//
// Geometry: four unit class centres built from an orthonormal set, with chosen overlaps
// (account leans towards refund, other towards shipping and account). A sample is its class
// centre plus isotropic Gaussian noise, L2-normalised like a real sentence embedding. The
// "true margin" of a sample is its cosine to its own centre minus the best cosine to another
// centre. Planted errors: 80 % are drawn from the samples with the smallest positive true margins
// (just inside their own class), 20 % from anywhere; each is relabelled to its nearest other class.

import { unsafeUniformIntDistribution, xoroshiro128plus, type RandomGenerator } from 'pure-rand';
import { ASIDES, DEMO_CLASSES, SLOTS, TEMPLATES, type DemoClass } from './texts';

export { DEMO_CLASSES, type DemoClass };

export type DemoOptions = {
  seed?: number;
  /** Number of samples (default 2000). */
  count?: number;
  /** Embedding dimension (default 64). */
  dimension?: number;
  /** Share of planted label errors (default 0.05). */
  errorRate?: number;
};

export type DemoSample = {
  externalId: string;
  /** Label as imported (a planted error carries the wrong label here). */
  label: DemoClass;
  /** The class the sample was generated from. */
  trueLabel: DemoClass;
  /** Unit-length embedding, float32. */
  features: Float32Array;
  text: string;
  metadata: { channel: string; created: string };
  /** Cosine to the own centre minus the best cosine to another centre (generator's view). */
  trueMargin: number;
};

export type PlantedError = {
  externalId: string;
  trueLabel: DemoClass;
  plantedLabel: DemoClass;
  trueMargin: number;
  /** boundary: drawn among the smallest positive margins; anywhere: drawn from the rest. */
  kind: 'boundary' | 'anywhere';
};

export type DemoDataset = {
  seed: number;
  dimension: number;
  classes: readonly DemoClass[];
  samples: DemoSample[];
  planted: PlantedError[];
};

export const DEMO_SEED = 20_250_611;
const CLASS_SHARES: Record<DemoClass, number> = { refund: 0.28, shipping: 0.34, account: 0.22, other: 0.16 };
const NOISE: Record<DemoClass, number> = { refund: 0.26, shipping: 0.26, account: 0.26, other: 0.31 };
const CHANNELS: readonly [string, number][] = [
  ['email', 0.4],
  ['chat', 0.35],
  ['web-form', 0.2],
  ['phone-note', 0.05],
];
/** Share of planted errors drawn near the boundaries; the band they come from, in multiples. */
const BOUNDARY_SHARE = 0.8;
const BAND_FACTOR = 4;
/** Share of samples (smallest true margins) whose text gets a second, other-class sentence. */
const ASIDE_SHARE = 0.1;

class Rng {
  readonly #g: RandomGenerator;
  constructor(seed: number) {
    this.#g = xoroshiro128plus(seed | 0);
  }
  /** Uniform integer in [from, to]. */
  int(from: number, to: number): number {
    return unsafeUniformIntDistribution(from, to, this.#g);
  }
  /** Uniform double in [0, 1) with 53 random bits. */
  uniform(): number {
    const hi = this.int(0, (1 << 26) - 1);
    const lo = this.int(0, (1 << 27) - 1);
    return (hi * 134_217_728 + lo) / 9_007_199_254_740_992;
  }
  /** Standard normal (Box–Muller). */
  normal(): number {
    let u = this.uniform();
    while (u === 0) u = this.uniform();
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * this.uniform());
  }
  pick<T>(items: readonly T[]): T {
    return items[this.int(0, items.length - 1)];
  }
  weighted<T>(items: readonly (readonly [T, number])[]): T {
    let r = this.uniform() * items.reduce((s, [, w]) => s + w, 0);
    for (const [item, w] of items) {
      r -= w;
      if (r < 0) return item;
    }
    return items[items.length - 1][0];
  }
  shuffle<T>(items: T[]): T[] {
    for (let i = items.length - 1; i > 0; i--) {
      const j = this.int(0, i);
      [items[i], items[j]] = [items[j], items[i]];
    }
    return items;
  }
}

function normalise(v: Float64Array): Float64Array {
  let s = 0;
  for (const x of v) s += x * x;
  const n = Math.sqrt(s);
  for (let i = 0; i < v.length; i++) v[i] /= n;
  return v;
}

function dot(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i] * b[i];
  return s;
}

/** k orthonormal vectors of length d (Gram–Schmidt on Gaussian vectors). */
function orthonormal(k: number, d: number, rng: Rng): Float64Array[] {
  const basis: Float64Array[] = [];
  while (basis.length < k) {
    const v = new Float64Array(d);
    for (let i = 0; i < d; i++) v[i] = rng.normal();
    for (const b of basis) {
      const p = dot(v, b);
      for (let i = 0; i < d; i++) v[i] -= p * b[i];
    }
    basis.push(normalise(v));
  }
  return basis;
}

function combine(d: number, parts: [number, Float64Array][]): Float64Array {
  const v = new Float64Array(d);
  for (const [w, b] of parts) for (let i = 0; i < d; i++) v[i] += w * b[i];
  return normalise(v);
}

/** The class centres (unit vectors) in DEMO_CLASSES order. */
export function demoCentres(seed: number, dimension: number): Float64Array[] {
  const e = orthonormal(4, dimension, new Rng(seed));
  return [
    e[0], // refund
    e[1], // shipping
    combine(dimension, [
      [0.45, e[0]],
      [0.89, e[2]],
    ]), // account, cosine ≈ 0.45 with refund
    combine(dimension, [
      [0.3, e[1]],
      [0.25, e[2]],
      [0.92, e[3]],
    ]), // other, leaning towards shipping and account
  ];
}

function fill(template: string, rng: Rng): string {
  return template.replace(/\{(\w+)\}/g, (_, slot: string) => {
    switch (slot) {
      case 'order':
        return `#${rng.int(10_000, 99_999)}`;
      case 'amount':
        return `€${rng.int(5, 180)}.${rng.pick(['00', '49', '95', '99'])}`;
      case 'item':
        return rng.pick(SLOTS.item);
      case 'day':
        return rng.pick(SLOTS.day);
      case 'place':
        return rng.pick(SLOTS.place);
      case 'device':
        return rng.pick(SLOTS.device);
      default:
        throw new Error(`demo text template: unknown slot {${slot}}`);
    }
  });
}

function isoDate(dayOffset: number): string {
  const start = Date.UTC(2025, 0, 6);
  return new Date(start + dayOffset * 86_400_000).toISOString().slice(0, 10);
}

/** Generates the demo data set. Same options → identical output. */
export function generateDemo(options: DemoOptions = {}): DemoDataset {
  const seed = options.seed ?? DEMO_SEED;
  const count = options.count ?? 2000;
  const dimension = options.dimension ?? 64;
  const errorRate = options.errorRate ?? 0.05;
  const classes = DEMO_CLASSES;
  const centres = demoCentres(seed, dimension);
  const geometry = new Rng(seed + 1);
  const words = new Rng(seed + 2);
  const planting = new Rng(seed + 3);

  // Class sizes from the shares; the rounding remainder goes to the largest class.
  const sizes = classes.map((c) => Math.floor(count * CLASS_SHARES[c]));
  sizes[1] += count - sizes.reduce((a, b) => a + b, 0);

  type Draft = { classIndex: number; x: Float64Array; margin: number; runnerUp: number };
  const drafts: Draft[] = [];
  classes.forEach((c, k) => {
    for (let n = 0; n < sizes[k]; n++) {
      const x = new Float64Array(dimension);
      for (let i = 0; i < dimension; i++) x[i] = centres[k][i] + NOISE[c] * geometry.normal();
      normalise(x);
      let best = -Infinity;
      let runnerUp = -1;
      for (let j = 0; j < classes.length; j++) {
        if (j === k) continue;
        const s = dot(x, centres[j]);
        if (s > best) {
          best = s;
          runnerUp = j;
        }
      }
      drafts.push({ classIndex: k, x, margin: dot(x, centres[k]) - best, runnerUp });
    }
  });
  geometry.shuffle(drafts);

  // Planted errors.
  const plantedCount = Math.round(count * errorRate);
  const boundaryCount = Math.round(plantedCount * BOUNDARY_SHARE);
  const positive = drafts
    .map((d, i) => ({ i, m: d.margin }))
    .filter((e) => e.m > 0)
    .sort((a, b) => a.m - b.m || a.i - b.i);
  const band = positive.slice(0, Math.min(positive.length, boundaryCount * BAND_FACTOR));
  const boundaryPicks = planting.shuffle(band.map((e) => e.i)).slice(0, boundaryCount);
  const chosen = new Set(boundaryPicks);
  const inBand = new Set(band.map((e) => e.i));
  const rest = positive.filter((e) => !inBand.has(e.i)).map((e) => e.i);
  const anywherePicks = planting.shuffle(rest).slice(0, plantedCount - boundaryPicks.length);
  for (const i of anywherePicks) chosen.add(i);

  // Messages whose own margin is among the smallest get a second sentence from the runner-up class.
  const asideCut = [...drafts.map((d) => d.margin)].sort((a, b) => a - b)[Math.floor(count * ASIDE_SHARE)];

  const width = String(count).length;
  const samples: DemoSample[] = drafts.map((d, i) => {
    const trueLabel = classes[d.classIndex];
    const label = chosen.has(i) ? classes[d.runnerUp] : trueLabel;
    let text = fill(words.pick(TEMPLATES[trueLabel]), words);
    if (d.margin <= asideCut) text += ` ${words.pick(ASIDES[classes[d.runnerUp]])}`;
    return {
      externalId: `msg-${String(i + 1).padStart(width, '0')}`,
      label,
      trueLabel,
      features: Float32Array.from(d.x),
      text,
      metadata: { channel: words.weighted(CHANNELS), created: isoDate(words.int(0, 172)) },
      trueMargin: d.margin,
    };
  });

  const boundarySet = new Set(boundaryPicks);
  const planted: PlantedError[] = [...chosen]
    .sort((a, b) => a - b)
    .map((i) => ({
      externalId: samples[i].externalId,
      trueLabel: samples[i].trueLabel,
      plantedLabel: samples[i].label,
      trueMargin: samples[i].trueMargin,
      kind: boundarySet.has(i) ? 'boundary' : 'anywhere',
    }));

  return { seed, dimension, classes, samples, planted };
}

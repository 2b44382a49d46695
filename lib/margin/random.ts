/**
 * Seeded randomness for the engine, on pure-rand's xoroshiro128+ generator. No global state: every
 * caller creates its own generator from an explicit integer seed, so a seed reproduces a result.
 */
import { xoroshiro128plus, unsafeUniformIntDistribution, type RandomGenerator } from 'pure-rand';
import { EngineInputError } from './types';

export interface Rng {
  /** Uniform integer in [from, to], both inclusive. */
  int(from: number, to: number): number;
}

export function createRng(seed: number): Rng {
  if (!Number.isSafeInteger(seed)) throw new EngineInputError(`seed must be an integer, got ${seed}`);
  // xoroshiro128plus takes a 32-bit seed; fold larger seeds into 32 bits deterministically.
  const s32 = Number(BigInt.asIntN(32, BigInt(seed) ^ (BigInt(seed) >> 32n)));
  const g: RandomGenerator = xoroshiro128plus(s32);
  return { int: (from, to) => unsafeUniformIntDistribution(from, to, g) };
}

/** Fisher–Yates shuffle in place. */
export function shuffleInPlace<T extends { length: number; [i: number]: unknown }>(a: T, rng: Rng): T {
  for (let i = a.length - 1; i > 0; i--) {
    const j = rng.int(0, i);
    const t = a[i];
    a[i] = a[j];
    a[j] = t;
  }
  return a;
}

/** A uniformly random permutation of 0 … n−1. */
export function permutation(n: number, rng: Rng): Int32Array {
  const p = new Int32Array(n);
  for (let i = 0; i < n; i++) p[i] = i;
  return shuffleInPlace(p, rng);
}

/**
 * Stratified fold assignment: fold[i] ∈ 0 … k−1 for every sample.
 *
 * Classes are taken in sorted order of their keys; each class's members are shuffled with the
 * seeded generator and dealt round-robin into the folds, the dealing position carrying over from one
 * class to the next. Hence in every class the per-fold counts differ by at most one, and so do the
 * overall fold sizes.
 */
export function stratifiedFoldAssignment(classKeys: ArrayLike<string | number>, k: number, seed: number): Int32Array {
  const n = classKeys.length;
  if (!Number.isInteger(k) || k < 2) throw new EngineInputError(`folds must be an integer ≥ 2, got ${k}`);
  if (k > n) throw new EngineInputError(`folds (${k}) exceeds the number of samples (${n})`);
  const byClass = new Map<string, number[]>();
  for (let i = 0; i < n; i++) {
    const key = String(classKeys[i]);
    let list = byClass.get(key);
    if (!list) byClass.set(key, (list = []));
    list.push(i);
  }
  const keys = [...byClass.keys()].sort(compareStrings);
  const rng = createRng(seed);
  const fold = new Int32Array(n);
  let pos = 0;
  for (const key of keys) {
    const members = shuffleInPlace(byClass.get(key) as number[], rng);
    for (const i of members) {
      fold[i] = pos % k;
      pos++;
    }
  }
  return fold;
}

/** Code-unit string order (locale-independent, so results do not depend on the machine). */
export function compareStrings(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

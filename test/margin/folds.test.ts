import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { stratifiedKFold } from '@/lib/margin/folds';
import { createRng, permutation, shuffleInPlace, stratifiedFoldAssignment } from '@/lib/margin/random';
import { EngineInputError } from '@/lib/margin/types';

function checkPartition(labels: string[], k: number, seed: number) {
  const { folds, assignment } = stratifiedKFold(labels, k, seed);
  const n = labels.length;
  // every sample is held out exactly once and trained on in the other k − 1 folds
  const heldOut = new Int32Array(n);
  for (const f of folds) {
    for (const i of f.test) heldOut[i]++;
    expect(f.train.length + f.test.length).toBe(n);
    const inTest = new Set(f.test);
    for (const i of f.train) expect(inTest.has(i)).toBe(false);
  }
  expect(Array.from(heldOut).every((c) => c === 1)).toBe(true);
  // stratified: within every class, per-fold counts differ by at most one; overall sizes too
  const classes = [...new Set(labels)];
  for (const c of classes) {
    const counts = new Array<number>(k).fill(0);
    labels.forEach((l, i) => l === c && counts[assignment[i]]++);
    expect(Math.max(...counts) - Math.min(...counts)).toBeLessThanOrEqual(1);
  }
  const sizes = folds.map((f) => f.test.length);
  expect(Math.max(...sizes) - Math.min(...sizes)).toBeLessThanOrEqual(1);
}

describe('stratified k-fold', () => {
  it('partitions and stratifies an unbalanced three-class set', () => {
    const labels = [...Array(37).fill('a'), ...Array(11).fill('b'), ...Array(5).fill('c')] as string[];
    checkPartition(labels, 5, 42);
  });

  it('is a partition with stratification for random label sets (property)', () => {
    fc.assert(
      fc.property(
        fc.array(fc.constantFrom('x', 'y', 'z'), { minLength: 10, maxLength: 80 }),
        fc.integer({ min: 2, max: 10 }),
        fc.integer({ min: 0, max: 2 ** 31 - 1 }),
        (labels, k, seed) => {
          const counts = new Map<string, number>();
          labels.forEach((l) => counts.set(l, (counts.get(l) ?? 0) + 1));
          fc.pre([...counts.values()].every((c) => c >= 2) && k <= labels.length);
          checkPartition(labels, k, seed);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('is deterministic for a seed and changes with the seed', () => {
    const labels = Array.from({ length: 100 }, (_, i) => (i % 3 === 0 ? 'p' : 'q'));
    const a = stratifiedKFold(labels, 5, 7).assignment;
    const b = stratifiedKFold(labels, 5, 7).assignment;
    const c = stratifiedKFold(labels, 5, 8).assignment;
    expect(Array.from(a)).toEqual(Array.from(b));
    // Two seeds agreeing on all 100 assignments has probability far below 1e-30.
    expect(Array.from(a)).not.toEqual(Array.from(c));
  });

  it('rejects singleton classes, k < 2 and k > n with clear messages', () => {
    expect(() => stratifiedKFold(['a', 'a', 'b'], 2, 1)).toThrow(
      new EngineInputError('cross-validation needs at least 2 samples in every class; class "b" has 1'),
    );
    expect(() => stratifiedFoldAssignment(['a', 'b'], 1, 1)).toThrow(new EngineInputError('folds must be an integer ≥ 2, got 1'));
    expect(() => stratifiedFoldAssignment(['a', 'b', 'a'], 4, 1)).toThrow(new EngineInputError('folds (4) exceeds the number of samples (3)'));
  });
});

describe('seeded helpers', () => {
  it('permutation is a permutation and reproducible by seed', () => {
    const p = permutation(50, createRng(3));
    expect([...p].sort((x, y) => x - y)).toEqual(Array.from({ length: 50 }, (_, i) => i));
    expect(Array.from(permutation(50, createRng(3)))).toEqual(Array.from(p));
  });

  it('shuffle is roughly uniform: every element visits every position (chi-square bound)', () => {
    // 3 elements, 6000 shuffles: each of the 6 orders expected 1000 times; chi-square with 5 d.o.f.
    // has its 99.9 % quantile at 20.52 (standard table), so a correct shuffle passes with p > 0.999.
    const rng = createRng(12345);
    const counts = new Map<string, number>();
    for (let t = 0; t < 6000; t++) {
      const key = shuffleInPlace([0, 1, 2], rng).join('');
      counts.set(key, (counts.get(key) ?? 0) + 1);
    }
    expect(counts.size).toBe(6);
    let chi2 = 0;
    for (const c of counts.values()) chi2 += (c - 1000) ** 2 / 1000;
    expect(chi2).toBeLessThan(20.52);
  });

  it('rejects a non-integer seed', () => {
    expect(() => createRng(1.5)).toThrow(EngineInputError);
  });
});

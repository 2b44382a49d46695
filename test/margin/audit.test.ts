import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { auditSamples, suspicionScore, type AuditResult } from '@/lib/margin/audit';
import type { FitSettings, LabelledData } from '@/lib/margin/model';
import { createRng, permutation } from '@/lib/margin/random';
import { loadBreastCancer, loadIris } from './datasets';

/**
 * Our own worked example on public data: flip a seeded 5 % of the labels of a fixture (each flipped
 * sample gets a different class chosen at random) and check that the audit ranks the flipped samples
 * near the top.
 */
function withFlips(ds: ReturnType<typeof loadIris>, fraction: number, seed: number): { data: LabelledData; flipped: Set<number> } {
  const n = ds.X.rows;
  const count = Math.round(fraction * n);
  const flipped = new Set(Array.from(permutation(n, createRng(seed)).slice(0, count)));
  const rng = createRng(seed + 1);
  const K = ds.classNames.length;
  const labels = Array.from(ds.labels, (k, i) => ds.classNames[flipped.has(i) ? (k + 1 + rng.int(0, K - 2)) % K : k]);
  return { data: { ids: Array.from({ length: n }, (_, i) => `s${String(i).padStart(3, '0')}`), labels, X: ds.X }, flipped };
}

const settings: FitSettings = { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'standard', seed: 1 };

function recallAt(a: AuditResult, flipped: Set<number>, k: number): number {
  return a.ranking.slice(0, k).filter((r) => flipped.has(Number(r.id.slice(1)))).length / flipped.size;
}

describe('planted label flips rank near the top', () => {
  it('UCI breast cancer, 5 % flipped (28 of 569), five flip seeds', () => {
    // Floors, from a measurement of this very setup (flip seeds 1–5): recall in the top 28 was
    // 0.893 / 0.893 / 0.893 / 0.893 / 0.857 (mean 0.886), in the top 56 between 0.929 and 1.
    // A random order would give 28/569 ≈ 0.05 and 56/569 ≈ 0.10. The linear SVM also has about 3 %
    // genuinely hard samples that compete for the top places, so a perfect 1.0 is not expected;
    // the floors leave room for two more misses at 2k than the worst seed measured and hold the mean
    // at k to 0.8.
    const recalls: number[] = [];
    for (const seed of [1, 2, 3, 4, 5]) {
      const { data, flipped } = withFlips(loadBreastCancer(), 0.05, seed);
      expect(flipped.size).toBe(28);
      const a = auditSamples(data, settings);
      recalls.push(recallAt(a, flipped, 28));
      expect(recallAt(a, flipped, 56)).toBeGreaterThanOrEqual(0.85);
      // Out-of-fold margins are harsher than in-sample ones for the flipped samples: in the full fit
      // they pull the boundary towards themselves (the reason DESIGN.md §4 asks for out-of-fold values).
      let oof = 0;
      let inSample = 0;
      for (const i of flipped) {
        oof += a.outOfFold.margin[i];
        inSample += a.fit.samples.margin[i];
      }
      expect(oof / flipped.size).toBeLessThan(inSample / flipped.size);
    }
    expect(recalls.reduce((s, r) => s + r, 0) / recalls.length).toBeGreaterThanOrEqual(0.8);
  });

  it('Iris, 5 % flipped (8 of 150), multi-class one-vs-rest', () => {
    // Measured for flip seeds 1 and 2: recall in the top 16 = 0.875 both (7 of 8); floor 6 of 8.
    for (const seed of [1, 2]) {
      const { data, flipped } = withFlips(loadIris(), 0.05, seed);
      const a = auditSamples(data, settings);
      expect(recallAt(a, flipped, 16)).toBeGreaterThanOrEqual(0.75);
      expect(a.fit.multiclass).not.toBeNull();
    }
  });
});

describe('the ranking', () => {
  const { data } = withFlips(loadIris(), 0.05, 3);
  const a = auditSamples(data, { ...settings, folds: 4 });

  it('lists every sample once, most suspicious first, ties by id, scores in [0, 1]', () => {
    expect(a.ranking.length).toBe(150);
    expect(new Set(a.ranking.map((r) => r.id)).size).toBe(150);
    for (let k = 1; k < a.ranking.length; k++) {
      const p = a.ranking[k - 1];
      const q = a.ranking[k];
      expect(p.suspicion > q.suspicion || (p.suspicion === q.suspicion && p.id < q.id)).toBe(true);
    }
    for (const r of a.ranking) {
      expect(r.suspicion).toBeGreaterThanOrEqual(0);
      expect(r.suspicion).toBeLessThanOrEqual(1);
    }
    expect(a.outOfFold.folds).toBe(4);
  });

  it('is deterministic for a seed', () => {
    const b = auditSamples(data, { ...settings, folds: 4 });
    expect(b.ranking).toEqual(a.ranking);
  });

  it('gives reasons: the top sample is explained, wrong-side samples say so', () => {
    expect(a.ranking[0].reasons.length).toBeGreaterThan(0);
    const index = new Map(data.ids.map((id, i) => [id, i]));
    for (const r of a.ranking) {
      const i = index.get(r.id) as number;
      if (a.fit.samples.flags[i] & 1) expect(r.reasons.some((s) => s.startsWith('wrong side of'))).toBe(true);
    }
  });
});

describe('suspicion score', () => {
  it('is bounded, non-increasing in both margins and non-decreasing in pivot influence (property)', () => {
    const m = fc.double({ min: -50, max: 50, noNaN: true });
    const d = fc.double({ min: 0, max: 5, noNaN: true });
    fc.assert(
      fc.property(m, m, d, m, m, d, (o1, i1, p1, o2, i2, p2) => {
        const s = suspicionScore(o1, i1, p1, 0.05);
        expect(s).toBeGreaterThanOrEqual(0);
        expect(s).toBeLessThanOrEqual(1);
        // dominance: lower (or equal) margins and larger (or equal) pivot influence never score lower
        if (o1 <= o2 && i1 <= i2 && p1 >= p2) expect(s).toBeGreaterThanOrEqual(suspicionScore(o2, i2, p2, 0.05));
      }),
      { numRuns: 500 },
    );
  });

  it('anchors (hand-worked): on the boundary everywhere and no pivot gives 0.6·½ + 0.3·½ = 0.45', () => {
    expect(suspicionScore(0, 0, 0, 0.05)).toBeCloseTo(0.45, 12);
    // exactly at the pivot threshold the pivot term is 0.1 · ½
    expect(suspicionScore(0, 0, 0.05, 0.05)).toBeCloseTo(0.5, 12);
    // σ(−2) = 1/(1 + e²) ≈ 0.119203: margins of +1 out of fold and in sample give 0.9·0.119203
    expect(suspicionScore(1, 1, 0, 0.05)).toBeCloseTo(0.9 / (1 + Math.exp(2)), 12);
  });
});

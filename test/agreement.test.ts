// Cohen's kappa, percent agreement and the original-vs-final confusion matrix (lib/agreement.ts).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { cohensKappa, confusionMatrix, kappaOfPairs, kappaOfTable, pairedRatings, percentAgreement } from '@/lib/agreement';

describe('Cohen\'s kappa against published worked examples', () => {
  it('the two-rater yes/no example of 50 proposals gives κ = 0.4', () => {
    // reference: the worked example in the Wikipedia article "Cohen's kappa" (section "Simple
    // example"), recalled from memory: 50 grant proposals, rater A yes & B yes 20, A yes & B no 5,
    // A no & B yes 10, both no 15. Published: p_o = 0.7, p_e = 0.5, κ = 0.4.
    // Arithmetic: p_o = (20 + 15)/50 = 0.7; A says yes 25/50 = 0.5, B says yes 30/50 = 0.6;
    // p_e = 0.5·0.6 + 0.5·0.4 = 0.5; κ = (0.7 − 0.5)/(1 − 0.5) = 0.4.
    const r = kappaOfTable([
      [20, 5],
      [10, 15],
    ]);
    expect(r.n).toBe(50);
    expect(r.observed).toBeCloseTo(0.7, 12);
    expect(r.expected).toBeCloseTo(0.5, 12);
    expect(r.kappa).toBeCloseTo(0.4, 12);
  });

  it('equal percent agreement, different kappas (the same article\'s second pair of tables)', () => {
    // reference: Wikipedia "Cohen's kappa", "Same percentages but different numbers" (recalled from
    // memory): both tables have p_o = 0.60; published κ ≈ 0.1304 and κ ≈ 0.2593.
    // Table 1 [[45,15],[25,15]]: A yes 0.6, B yes 0.7 → p_e = 0.42 + 0.12 = 0.54 → κ = 0.06/0.46.
    // Table 2 [[25,35],[5,35]]:  A yes 0.6, B yes 0.3 → p_e = 0.18 + 0.28 = 0.46 → κ = 0.14/0.54.
    const t1 = kappaOfTable([
      [45, 15],
      [25, 15],
    ]);
    const t2 = kappaOfTable([
      [25, 35],
      [5, 35],
    ]);
    expect(t1.observed).toBeCloseTo(0.6, 12);
    expect(t2.observed).toBeCloseTo(0.6, 12);
    expect(t1.kappa).toBeCloseTo(0.1304, 4);
    expect(t2.kappa).toBeCloseTo(0.2593, 4);
  });
});

describe('hand-worked cases', () => {
  it('three categories, 20 items', () => {
    // hand-worked: table rows = rater A, columns = rater B
    //   [5 1 0]   A row sums 6, 7, 7; B column sums 7, 5, 8; diagonal 5 + 4 + 7 = 16
    //   [2 4 1]   p_o = 16/20 = 0.8
    //   [0 0 7]   p_e = (6·7 + 7·5 + 7·8)/20² = 133/400 = 0.3325
    //             κ = (0.8 − 0.3325)/(1 − 0.3325) = 0.4675/0.6675 = 0.70037453…
    const r = kappaOfTable([
      [5, 1, 0],
      [2, 4, 1],
      [0, 0, 7],
    ]);
    expect(r.observed).toBeCloseTo(0.8, 12);
    expect(r.expected).toBeCloseTo(0.3325, 12);
    expect(r.kappa).toBeCloseTo(0.4675 / 0.6675, 12);
  });

  it('only the items both raters rated count', () => {
    // hand-worked: shared items x, y, z; A = (refund, shipping, refund), B = (refund, refund, refund)
    // p_o = 2/3; A: refund 2/3, shipping 1/3; B: refund 1 → p_e = 2/3 → κ = 0 (no better than chance).
    const a = new Map([['x', 'refund'], ['y', 'shipping'], ['z', 'refund'], ['only-a', 'account']]);
    const b = new Map([['z', 'refund'], ['y', 'refund'], ['x', 'refund'], ['only-b', 'other']]);
    expect(pairedRatings(a, b)).toEqual([['refund', 'refund'], ['shipping', 'refund'], ['refund', 'refund']]);
    const r = cohensKappa(a, b);
    expect(r.n).toBe(3);
    expect(r.kappa).toBeCloseTo(0, 12);
    expect(percentAgreement(pairedRatings(a, b))).toBeCloseTo(2 / 3, 12);
  });

  it('complete disagreement on a balanced two-category table gives κ = −1', () => {
    // hand-worked: [[0,5],[5,0]]: p_o = 0, p_e = 0.5·0.5 + 0.5·0.5 = 0.5, κ = −0.5/0.5 = −1.
    expect(kappaOfTable([[0, 5], [5, 0]]).kappa).toBeCloseTo(-1, 12);
  });

  it('no shared items: nothing to report', () => {
    expect(cohensKappa(new Map([['a', 1]]), new Map([['b', 1]])).kappa).toBeNull();
    expect(percentAgreement([])).toBeNull();
  });

  it('confusion of original vs final labels', () => {
    // hand-worked: 5 items; refund→refund ×2, refund→shipping ×1, shipping→shipping ×1, other→refund ×1
    const c = confusionMatrix(
      [
        { original: 'refund', final: 'refund' },
        { original: 'refund', final: 'shipping' },
        { original: 'shipping', final: 'shipping' },
        { original: 'refund', final: 'refund' },
        { original: 'other', final: 'refund' },
      ],
      ['refund', 'shipping'],
    );
    expect(c.classes).toEqual(['refund', 'shipping', 'other']);
    expect(c.counts).toEqual([
      [2, 1, 0],
      [0, 1, 0],
      [1, 0, 0],
    ]);
    expect(c.total).toBe(5);
    expect(c.unchanged).toBe(3);
  });
});

describe('properties', () => {
  const ratings = fc.array(fc.tuple(fc.integer({ min: 0, max: 3 }), fc.integer({ min: 0, max: 3 })), { minLength: 1, maxLength: 60 });

  it('κ = 1 when both raters give identical ratings', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 4 }), { minLength: 1, maxLength: 60 }), (xs) => {
        expect(kappaOfPairs(xs.map((x) => [x, x] as const)).kappa).toBe(1);
      }),
    );
  });

  it('symmetric in the two raters, and −1 ≤ κ ≤ 1, κ ≤ p_o-based bound', () => {
    fc.assert(
      fc.property(ratings, (pairs) => {
        const ab = kappaOfPairs(pairs);
        const ba = kappaOfPairs(pairs.map(([x, y]) => [y, x] as const));
        expect(ab.kappa).not.toBeNull();
        expect(Math.abs((ab.kappa as number) - (ba.kappa as number))).toBeLessThan(1e-12);
        expect(ab.kappa as number).toBeLessThanOrEqual(1);
        expect(ab.kappa as number).toBeGreaterThanOrEqual(-1);
        // textbook fact: κ < 1 whenever the raters disagree on at least one item (p_o < 1)
        if ((ab.observed as number) < 1) expect(ab.kappa as number).toBeLessThan(1);
      }),
    );
  });

  it('the confusion matrix counts every item once', () => {
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.constantFrom('a', 'b', 'c'), fc.constantFrom('a', 'b', 'd')), { maxLength: 40 }), (xs) => {
        const c = confusionMatrix(xs.map(([original, final]) => ({ original, final })), ['a', 'b']);
        expect(c.counts.flat().reduce((s, v) => s + v, 0)).toBe(xs.length);
        expect(c.unchanged).toBe(xs.filter(([o, f]) => o === f).length);
      }),
    );
  });
});

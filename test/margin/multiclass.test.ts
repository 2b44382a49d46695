import { describe, expect, it } from 'vitest';
import { decisionFunction, fitMargins, type LabelledData } from '@/lib/margin/model';
import { loadIris } from './datasets';

// Fisher's Iris (fixture, see test/fixtures/README.md): 150 samples, 50 per species (a fact of the data set).
const iris = loadIris();
const data: LabelledData = {
  ids: Array.from({ length: iris.X.rows }, (_, i) => `iris-${i + 1}`),
  labels: Array.from(iris.labels, (k) => iris.classNames[k]),
  X: iris.X,
};

describe('one-vs-rest on Iris', () => {
  const r = fitMargins(data, { kernel: { type: 'linear' }, C: 100, solver: 'smo', scale: 'standard', seed: 1, pivotCap: 0 });

  it('has one boundary per class, classes sorted, y = +1 for the boundary class', () => {
    expect(r.classes).toEqual(['setosa', 'versicolor', 'virginica']);
    expect(r.boundaries.map((b) => b.name)).toEqual(['setosa vs rest', 'versicolor vs rest', 'virginica vs rest']);
    r.boundaries.forEach((b) => {
      for (let i = 0; i < 150; i++) expect(b.y[i]).toBe(data.labels[i] === b.positive ? 1 : -1);
    });
  });

  it('setosa vs rest separates the training data (textbook: setosa is linearly separable from the other two species)', () => {
    const setosa = r.boundaries[0];
    expect(setosa.counts.wrongSide).toBe(0);
    expect(setosa.separable).toBe(true);
    expect(setosa.solution.converged).toBe(true);
  });

  it('multi-class margin = own score − best other score; prediction = arg-max; confusion counts', () => {
    const scores = r.boundaries.map((b) => b.standings.decision);
    const confusion = [0, 1, 2].map(() => [0, 0, 0]);
    for (let i = 0; i < 150; i++) {
      const own = r.classIndex[i];
      const others = [0, 1, 2].filter((k) => k !== own).map((k) => scores[k][i]);
      expect(r.samples.margin[i]).toBeCloseTo(scores[own][i] - Math.max(...others), 12);
      const pred = [0, 1, 2].reduce((best, k) => (scores[k][i] > scores[best][i] ? k : best), 0);
      expect(r.samples.predicted[i]).toBe(pred);
      // a negative multi-class margin means another class outscored the own class
      expect(r.samples.margin[i] < 0).toBe(pred !== own && scores[pred][i] > scores[own][i]);
      confusion[own][pred]++;
    }
    expect(r.multiclass?.confusion).toEqual(confusion);
    // each row sums to the 50 samples of its species
    expect(r.multiclass?.confusion.map((row) => row.reduce((a, b) => a + b, 0))).toEqual([50, 50, 50]);
    const trace = confusion[0][0] + confusion[1][1] + confusion[2][2];
    expect(r.multiclass?.accuracy).toBeCloseTo(trace / 150, 12);
  });

  it('sample flags are the union over boundaries; decision and distance come from the own boundary', () => {
    for (let i = 0; i < 150; i++) {
      const own = r.boundaries[r.classIndex[i]].standings;
      expect(r.samples.decision[i]).toBe(own.decision[i]);
      expect(r.samples.distance[i]).toBe(own.distance[i]);
      expect(r.samples.flags[i]).toBe(r.boundaries.reduce((f, b) => f | b.standings.flags[i], 0));
    }
  });

  it('decisionFunction on the raw training rows reproduces the training decision values', () => {
    const again = decisionFunction(r, data.X);
    again.forEach((f, b) => {
      for (let i = 0; i < 150; i++) expect(f[i]).toBeCloseTo(r.boundaries[b].standings.decision[i], 9);
    });
  });

  it('hard margin: setosa vs rest separable, versicolor vs rest not (textbook: versicolor and virginica overlap)', () => {
    const h = fitMargins(data, { kernel: { type: 'linear' }, C: Infinity, hard: true, solver: 'smo', scale: 'standard', seed: 1, pivotCap: 0 });
    expect(h.boundaries[0].hardMargin?.separable).toBe(true);
    expect(h.boundaries[0].separable).toBe(true);
    expect(h.boundaries[1].hardMargin?.separable).toBe(false);
    expect(h.boundaries[1].separable).toBe(false);
    expect(Number.isNaN(h.boundaries[1].marginWidth)).toBe(true);
    const v = h.boundaries[1].hardMargin;
    if (v && !v.separable) expect(v.wrongSideCount).toBeGreaterThan(0);
  });

  it('RBF one-vs-rest evaluates new rows through the stored support vectors', () => {
    const k = fitMargins(data, { kernel: { type: 'rbf', gamma: 0.5 }, C: 1, solver: 'smo', scale: 'standard', seed: 1, pivotCap: 0 });
    expect(k.boundaries.every((b) => b.supportVectors !== null && b.solution.w === null)).toBe(true);
    const again = decisionFunction(k, data.X);
    again.forEach((f, b) => {
      for (let i = 0; i < 150; i += 7) expect(f[i]).toBeCloseTo(k.boundaries[b].standings.decision[i], 9);
    });
  });
});

import { describe, expect, it } from 'vitest';
import { selectModel } from '@/lib/margin/select';
import type { LabelledData } from '@/lib/margin/model';
import { EngineInputError } from '@/lib/margin/types';
import { loadBreastCancer, loadIris } from './datasets';

function asData(ds: ReturnType<typeof loadIris>): LabelledData {
  return { ids: Array.from({ length: ds.X.rows }, (_, i) => `s${i}`), labels: Array.from(ds.labels, (k) => ds.classNames[k]), X: ds.X };
}

describe('model selection by stratified cross-validation', () => {
  const bc = asData(loadBreastCancer());
  const grid = { log2C: [4, -6, -2, 0, 2, -4] }; // deliberately unsorted

  it('scores every grid cell and picks a C inside the grid with the best accuracy', () => {
    const r = selectModel(bc, { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'standard', seed: 1, tol: 1e-5 }, { grid });
    expect(r.cells.map((c) => c.log2C)).toEqual([-6, -4, -2, 0, 2, 4]);
    expect(grid.log2C).toContain(r.best.log2C);
    expect(r.best.C).toBe(2 ** r.best.log2C);
    const top = Math.max(...r.cells.map((c) => c.accuracy));
    expect(r.best.accuracy).toBe(top);
    // ties go to the smaller C
    expect(r.cells.filter((c) => c.accuracy === top).every((c) => c.C >= r.best.C)).toBe(true);
    for (const c of r.cells) {
      expect(c.accuracy).toBeGreaterThan(0.5);
      expect(c.accuracy).toBeLessThanOrEqual(1);
      expect(c.converged).toBe(true);
      expect(c.gamma).toBeNull();
    }
    expect(r.folds).toBe(5);
  });

  it('warm start along increasing C gives the same cross-validation result as cold starts', () => {
    const settings = { kernel: { type: 'linear' }, C: 1, solver: 'smo', scale: 'standard', seed: 1, tol: 1e-5 } as const;
    const warm = selectModel(bc, settings, { grid, warmStart: true });
    const cold = selectModel(bc, settings, { grid, warmStart: false });
    expect(warm.warmStart).toBe(true);
    expect(cold.warmStart).toBe(false);
    warm.cells.forEach((w, k) => {
      const c = cold.cells[k];
      expect(w.accuracy).toBe(c.accuracy);
      expect(Math.abs(w.meanHinge - c.meanHinge)).toBeLessThan(1e-3);
    });
    expect(warm.best.log2C).toBe(cold.best.log2C);
  });

  it('searches gamma for the RBF kernel (Iris, one-vs-rest)', () => {
    const iris = asData(loadIris());
    const r = selectModel(
      iris,
      { kernel: { type: 'rbf', gamma: 1 }, C: 1, solver: 'smo', scale: 'standard', seed: 3 },
      { grid: { log2C: [-1, 1, 3], log2Gamma: [-3, -1] }, folds: 3 },
    );
    expect(r.cells.length).toBe(6);
    expect([-1, 1, 3]).toContain(r.best.log2C);
    expect([-3, -1]).toContain(r.best.log2Gamma);
    expect(r.best.gamma).toBe(2 ** (r.best.log2Gamma as number));
    expect(r.best.accuracy).toBe(Math.max(...r.cells.map((c) => c.accuracy)));
    expect(r.folds).toBe(3);
  });

  it('rejects what it cannot tune', () => {
    const base = { C: 1, solver: 'smo', scale: 'standard', seed: 1 } as const;
    expect(() => selectModel(bc, { ...base, kernel: { type: 'linear' }, hard: true })).toThrow(
      new EngineInputError('model selection tunes C; it does not apply to hard-margin mode'),
    );
    expect(() => selectModel(bc, { ...base, kernel: { type: 'linear' } }, { grid: { log2C: [0], log2Gamma: [0] } })).toThrow(
      new EngineInputError('a gamma grid needs the rbf or poly kernel'),
    );
  });
});

// Warming a worker up (lib/server/fits/warm.ts): the matrices of projects with a fit finished
// within the window are read into the process's cache, newest first, within the byte budget;
// older projects are left alone; two concurrent reads of one matrix share one read (data.ts).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Db } from '@/lib/server/db';
import { encodeFeatures } from '@/lib/server/features';
import { cachedFeatureMatrix, featureMatrix, invalidateFeatureCache } from '@/lib/server/fits/data';
import { persistentWorkerEngine } from '@/lib/server/fits/engine';
import { warmUpEngines, warmUpFeatureMatrices } from '@/lib/server/fits/warm';
import { createTestDatabase, type TestDatabase } from './db-harness';

let t: TestDatabase;
let db: Db;
const now = new Date('2026-12-02T10:00:00Z');

async function projectWithFit(teamId: string, name: string, rows: number, finishedAt: Date): Promise<string> {
  const p = await db.project.create({ data: { teamId, name, featureCount: 3, settings: '{}' } });
  await db.sample.createMany({
    data: Array.from({ length: rows }, (_, i) => ({
      projectId: p.id,
      externalId: `${name}-${i}`,
      features: encodeFeatures([i, -i, i / 2]),
      originalLabel: i % 2 ? 'a' : 'b',
      currentLabel: i % 2 ? 'a' : 'b',
    })),
  });
  const revision = await db.revision.create({ data: { projectId: p.id, number: 0, kind: 'import' } });
  await db.fit.create({ data: { projectId: p.id, revisionId: revision.id, revisionNumber: 0, status: 'done', settings: '{}', finishedAt } });
  return p.id;
}

let recent: string;
let older: string;
let large: string;

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
  const team = await db.team.create({ data: { name: 'Warm team' } });
  older = await projectWithFit(team.id, 'older', 5, new Date(now.getTime() - 48 * 3600_000));
  recent = await projectWithFit(team.id, 'recent', 7, new Date(now.getTime() - 3600_000));
  large = await projectWithFit(team.id, 'large', 40, new Date(now.getTime() - 1800_000));
});
afterAll(async () => {
  invalidateFeatureCache();
  await t.drop();
});

describe('warming a worker up', () => {
  it('reads the matrices of recently fitted projects within the byte budget, and no others', async () => {
    invalidateFeatureCache();
    const logged: string[] = [];
    // Budget: 7 rows × 3 columns × 4 bytes = 84 bytes fit, the 40-row project (480 bytes) does not.
    const w = await warmUpFeatureMatrices(db, { now, hours: 24, maxBytes: 100, log: (msg, f) => logged.push(`${msg} ${String(f?.projectId)}`) });
    expect(w.projects).toEqual([recent]);
    expect(w.rows).toBe(7);
    expect(cachedFeatureMatrix(recent)?.rows).toBe(7);
    expect(cachedFeatureMatrix(older)).toBeNull();
    expect(cachedFeatureMatrix(large)).toBeNull();
    expect(logged).toEqual([`project warmed ${recent}`]);
    const all = await warmUpFeatureMatrices(db, { now, hours: 72 });
    expect(all.projects).toEqual([large, recent, older]); // newest fit first
    expect(cachedFeatureMatrix(older)?.X.slice(0, 3)).toEqual(Float32Array.from([0, -0, 0]));
  });

  it('reads nothing with a window of 0 hours', async () => {
    invalidateFeatureCache();
    expect((await warmUpFeatureMatrices(db, { now, hours: 0 })).projects).toEqual([]);
  });

  it('shares one read between concurrent callers', async () => {
    invalidateFeatureCache();
    const [a, b] = await Promise.all([featureMatrix(db, large), featureMatrix(db, large)]);
    expect(a).toBe(b);
    expect(a.rows).toBe(40);
  });
});

describe('warming the engine up', () => {
  it('runs one small fit in each engine thread', async () => {
    const found = await warmUpEngines([persistentWorkerEngine(), persistentWorkerEngine()]);
    expect(found).toEqual([
      ['down', 'up'],
      ['down', 'up'],
    ]);
  });
});

// The demo project after seeding and its initial fit: the queue must contain the label errors the
// demo generator planted (its own record, lib/server/demo/generate.ts `planted`), at a measured rate.
// Measured when written (demo seed 20250611, 2,000 samples, 100 planted errors, default queue cap
// 300, linear kernel, l2 scaling): 99 of 100 planted errors in the queue, 73 among its 100 most
// suspicious items. The assertions keep a margin below those figures.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Db } from '@/lib/server/db';
import { generateDemo, type DemoDataset } from '@/lib/server/demo/generate';
import { seedDemo } from '@/lib/server/demo/seed';
import { runInitialFit } from '@/lib/server/fits';
import { mintTeamScope } from '@/lib/server/authz/scope';
import { claimNext } from '@/lib/server/queue/claim';
import { itemForReviewer, queueStatus } from '@/lib/server/queue/view';
import { createTestDatabase, type TestDatabase } from './db-harness';

let t: TestDatabase;
let db: Db;
let dataset: DemoDataset;
let projectId: string;
let teamId: string;

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
  dataset = generateDemo();
  const seeded = await seedDemo(db, { dataset });
  projectId = seeded.projectId as string;
  teamId = seeded.teamId;
  const out = await runInitialFit(projectId, db);
  expect(out?.status).toBe('done');
});
afterAll(async () => {
  await t.drop();
});

describe('the demo queue', () => {
  it('contains the planted label errors', async () => {
    const items = await db.queueItem.findMany({ where: { projectId }, orderBy: [{ suspicion: 'desc' }, { id: 'asc' }], include: { sample: true } });
    const planted = new Set(dataset.planted.map((p) => p.externalId));
    expect(planted.size).toBe(100);
    const inQueue = items.filter((i) => planted.has(i.sample.externalId)).length;
    const inTop100 = items.slice(0, 100).filter((i) => planted.has(i.sample.externalId)).length;
    console.log(`[demo queue] ${items.length} items; planted errors in the queue: ${inQueue}/100; among the top 100: ${inTop100}`);
    expect(items.length).toBe(300); // the default queue cap
    expect(inQueue).toBeGreaterThanOrEqual(90);
    expect(inTop100).toBeGreaterThanOrEqual(60);
  });

  it('shows a reviewer the top item with its standing in words and five labelled neighbours, without votes', async () => {
    const reviewer = await db.user.findFirstOrThrow({ where: { email: 'reviewer1@harbor-lane.example' } });
    const scope = mintTeamScope(teamId);
    const actor = { userId: reviewer.id, role: 'reviewer' as const };
    const claimed = await claimNext({ db }, scope, actor, { projectId });
    expect(claimed).not.toBeNull();
    const view = await itemForReviewer({ db }, scope, actor, projectId, claimed?.itemId as string);
    expect(view.standing?.headline).toMatch(/^(\d+\.\d\d from the boundary, .+ of |on the boundary between )/);
    expect(view.standing?.headline).toContain(`${view.sample.currentLabel} | `);
    // No wait budget in these deps (QueueDeps.neighbourWaitMs unset): the answer has its neighbours.
    const neighbours = view.neighbours ?? [];
    expect(view.neighbours).toHaveLength(5);
    for (const n of neighbours) {
      expect(dataset.classes).toContain(n.label);
      expect(n.sampleId).not.toBe(view.sample.id);
    }
    const distances = neighbours.map((n) => n.distance);
    expect([...distances].sort((a, b) => a - b)).toEqual(distances);
    expect(view.classes).toEqual([...dataset.classes]);
    expect(JSON.stringify(view)).not.toMatch(/"votes"|"decision"/);
    const status = await queueStatus({ db }, scope, projectId);
    expect(status.counts.open).toBe(300);
    expect(status.reviewing.map((r) => r.name)).toEqual([reviewer.name]);
    expect(status.current?.status).toBe('done');
  });
});

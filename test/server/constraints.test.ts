// Constraints of the data model that the product relies on, on the database under test.

import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { isUniqueViolation, type Db } from '@/lib/server/db';
import { decodeFeatures, encodeFeatures } from '@/lib/server/features';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';

describe(`data model constraints on ${TEST_PROVIDER}`, () => {
  let t: TestDatabase;
  let db: Db;
  let ids: { item: string; reviewer1: string; reviewer2: string; project: string };

  beforeAll(async () => {
    t = await createTestDatabase();
    await t.migrate();
    db = t.client();
    const team = await db.team.create({ data: { name: 'Constraint team' } });
    const [reviewer1, reviewer2] = await Promise.all(
      ['r1', 'r2'].map((r) => db.user.create({ data: { email: `${r}@example.test`, name: r, passwordHash: 'x' } })),
    );
    const project = await db.project.create({ data: { teamId: team.id, name: 'P', featureCount: 3, settings: '{}' } });
    const sample = await db.sample.create({
      data: { projectId: project.id, externalId: 'a', features: encodeFeatures([1, 2, 3]), originalLabel: 'x', currentLabel: 'x' },
    });
    const item = await db.queueItem.create({
      data: { projectId: project.id, sampleId: sample.id, revisionNumber: 0, suspicion: 1 },
    });
    ids = { item: item.id, reviewer1: reviewer1.id, reviewer2: reviewer2.id, project: project.id };
  });
  afterAll(async () => {
    await t.drop();
  });

  it('allows one vote per reviewer per queue item (unique constraint)', async () => {
    await db.vote.create({ data: { queueItemId: ids.item, userId: ids.reviewer1, decision: 'keep' } });
    const second = await db.vote
      .create({ data: { queueItemId: ids.item, userId: ids.reviewer1, decision: 'relabel', label: 'y' } })
      .catch((e: unknown) => e);
    expect(isUniqueViolation(second)).toBe(true);
    await db.vote.create({ data: { queueItemId: ids.item, userId: ids.reviewer2, decision: 'relabel', label: 'y' } });
    expect(await db.vote.count({ where: { queueItemId: ids.item } })).toBe(2);
  });

  it('keeps external ids unique within a project', async () => {
    const dup = await db.sample
      .create({ data: { projectId: ids.project, externalId: 'a', features: encodeFeatures([0, 0, 0]), originalLabel: 'x', currentLabel: 'x' } })
      .catch((e: unknown) => e);
    expect(isUniqueViolation(dup)).toBe(true);
    expect(isUniqueViolation(new Error('other'))).toBe(false);
  });

  it('stores feature vectors byte for byte (random float32 vectors through the database)', async () => {
    const vectors = fc.sample(fc.array(fc.float(), { minLength: 1, maxLength: 64 }), { numRuns: 40, seed: 7 });
    const written = vectors.map((v, i) => ({ externalId: `v${i}`, bytes: encodeFeatures(Float32Array.from(v)) }));
    await db.sample.createMany({
      data: written.map((w) => ({ projectId: ids.project, externalId: w.externalId, features: w.bytes, originalLabel: 'x', currentLabel: 'x' })),
    });
    const read = await db.sample.findMany({ where: { externalId: { startsWith: 'v' } }, select: { externalId: true, features: true } });
    expect(read).toHaveLength(written.length);
    const byId = new Map(read.map((r) => [r.externalId, r.features]));
    for (const w of written) {
      const back = byId.get(w.externalId) ?? new Uint8Array();
      expect(Buffer.from(back).equals(Buffer.from(w.bytes))).toBe(true);
      expect(decodeFeatures(back).length).toBe(w.bytes.length / 4);
    }
  });
});

// The demo seed (DESIGN.md §7): deterministic, about 2,000 samples in 4 classes with unit-length
// 64-d embeddings, 5 % planted label errors lying near the class boundaries, three users who can
// sign in with the published passwords, idempotent unless reset.

import { dictionary } from '@zxcvbn-ts/language-common';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO_PROJECT, DEMO_TEAM_NAME, DEMO_USERS } from '@/lib/server/demo/constants';
import { generateDemo, type DemoDataset } from '@/lib/server/demo/generate';
import { seedDemo } from '@/lib/server/demo/seed';
import { decodeFeatures } from '@/lib/server/features';
import { verifyPassword } from '@/lib/server/password';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';

type Row = { externalId: string; currentLabel: string; originalLabel: string; features: Uint8Array; text: string | null; metadata: string | null };

async function samplesOf(t: TestDatabase): Promise<Row[]> {
  return t.client().sample.findMany({
    orderBy: { externalId: 'asc' },
    select: { externalId: true, currentLabel: true, originalLabel: true, features: true, text: true, metadata: true },
  });
}

describe(`demo seed on ${TEST_PROVIDER}`, () => {
  let a: TestDatabase;
  let b: TestDatabase;
  let dataset: DemoDataset;
  let rows: Row[];

  beforeAll(async () => {
    [a, b] = await Promise.all([createTestDatabase(), createTestDatabase()]);
    await Promise.all([a.migrate(), b.migrate()]);
    // Two independent generations, seeded into two databases.
    const ra = await seedDemo(a.client(), { dataset: generateDemo() });
    const rb = await seedDemo(b.client(), { dataset: generateDemo() });
    expect([ra.status, rb.status]).toEqual(['created', 'created']);
    dataset = generateDemo();
    rows = await samplesOf(a);
  });
  afterAll(async () => {
    await Promise.all([a.drop(), b.drop()]);
  });

  it('is deterministic: two seeds give identical labels, features, texts and metadata', async () => {
    const other = await samplesOf(b);
    expect(other.length).toBe(rows.length);
    const key = (r: Row) => `${r.externalId}|${r.currentLabel}|${Buffer.from(r.features).toString('hex')}|${r.text}|${r.metadata}`;
    expect(other.map(key)).toEqual(rows.map(key));
  });

  it('has one team, one project of about 2,000 samples in the four classes, revision 0 and an import batch', async () => {
    const db = a.client();
    expect(rows.length).toBeGreaterThanOrEqual(1900);
    expect(rows.length).toBeLessThanOrEqual(2100);
    const team = await db.team.findFirstOrThrow({ where: { name: DEMO_TEAM_NAME }, include: { projects: { include: { classes: true, revisions: true, imports: true } } } });
    expect(team.projects).toHaveLength(1);
    const project = team.projects[0];
    expect(project.name).toBe(DEMO_PROJECT.name);
    expect(project.featureCount).toBe(64);
    expect(project.currentRevision).toBe(0);
    expect(project.classes.sort((x, y) => x.position - y.position).map((c) => c.name)).toEqual(['refund', 'shipping', 'account', 'other']);
    expect(project.revisions.map((r) => [r.number, r.kind])).toEqual([[0, 'import']]);
    expect(project.imports.map((i) => [i.status, i.rowCount, i.revisionNumber])).toEqual([['applied', rows.length, 0]]);
    const labels = new Set(rows.map((r) => r.currentLabel));
    expect([...labels].sort()).toEqual(['account', 'other', 'refund', 'shipping']);
    for (const r of rows) {
      expect(r.text?.length ?? 0).toBeGreaterThan(10);
      const meta = JSON.parse(r.metadata ?? '{}') as { channel?: string; created?: string };
      expect(meta.channel).toMatch(/^(email|chat|web-form|phone-note)$/);
      expect(meta.created).toMatch(/^2025-\d\d-\d\d$/);
    }
  });

  it('stores unit-length 64-d float32 embeddings', () => {
    for (const r of rows) {
      const v = decodeFeatures(r.features, 64);
      let s = 0;
      for (const x of v) s += x * x;
      expect(Math.abs(Math.sqrt(s) - 1)).toBeLessThan(1e-5);
    }
  });

  it('plants exactly 5 % label errors, each labelled as another class than its own', () => {
    expect(dataset.planted.length).toBe(Math.round(rows.length * 0.05));
    const byId = new Map(rows.map((r) => [r.externalId, r]));
    const planted = new Set(dataset.planted.map((p) => p.externalId));
    for (const p of dataset.planted) {
      const row = byId.get(p.externalId);
      expect(row?.currentLabel).toBe(p.plantedLabel);
      expect(p.plantedLabel).not.toBe(p.trueLabel);
    }
    for (const s of dataset.samples) {
      if (!planted.has(s.externalId)) expect(byId.get(s.externalId)?.currentLabel).toBe(s.trueLabel);
    }
  });

  it('puts the planted errors near the boundaries (independent nearest-centroid check)', () => {
    // Centroids from the stored vectors and the generator's true classes; a sample's margin is
    // its cosine to its own class centroid minus the best cosine to another one. Computed here,
    // not taken from the generator.
    const classes = ['refund', 'shipping', 'account', 'other'];
    const truth = new Map(dataset.samples.map((s) => [s.externalId, s.trueLabel]));
    const vectors = rows.map((r) => decodeFeatures(r.features, 64));
    const centroid = classes.map(() => new Float64Array(64));
    rows.forEach((r, i) => {
      const k = classes.indexOf(truth.get(r.externalId) ?? '');
      for (let d = 0; d < 64; d++) centroid[k][d] += vectors[i][d];
    });
    for (const c of centroid) {
      const n = Math.hypot(...c);
      for (let d = 0; d < 64; d++) c[d] /= n;
    }
    const margin = rows.map((r, i) => {
      const scores = centroid.map((c) => c.reduce((s, x, d) => s + x * vectors[i][d], 0));
      const own = classes.indexOf(truth.get(r.externalId) ?? '');
      return scores[own] - Math.max(...scores.filter((_, j) => j !== own));
    });
    const planted = new Set(dataset.planted.map((p) => p.externalId));
    const all = [...margin].sort((x, y) => x - y);
    const plantedMargins = rows.map((r, i) => (planted.has(r.externalId) ? margin[i] : NaN)).filter((m) => !Number.isNaN(m));
    const quartile = all[Math.floor(all.length / 4)];
    const median = all[Math.floor(all.length / 2)];
    const belowQuartile = plantedMargins.filter((m) => m < quartile).length / plantedMargins.length;
    const belowMedian = plantedMargins.filter((m) => m < median).length / plantedMargins.length;
    // A uniform choice would put 25 % below the quartile and 50 % below the median.
    expect(belowQuartile).toBeGreaterThan(0.6);
    expect(belowMedian).toBeGreaterThan(0.75);
  });

  it('creates three users (one lead, two reviewers) who sign in with the published passwords', async () => {
    const db = a.client();
    const members = await db.membership.findMany({ include: { user: true } });
    expect(members).toHaveLength(3);
    expect(members.map((m) => m.role).sort()).toEqual(['lead', 'reviewer', 'reviewer']);
    for (const u of DEMO_USERS) {
      const m = members.find((x) => x.user.email === u.email);
      expect(m?.role).toBe(u.role);
      expect(await verifyPassword(m?.user.passwordHash ?? '', u.password)).toBe(true);
      expect(await verifyPassword(m?.user.passwordHash ?? '', `${u.password}x`)).toBe(false);
    }
  });

  it('uses demo passwords of 12+ characters that are not on a common-password list', () => {
    // Reference: the "passwords-common" list of @zxcvbn-ts/language-common.
    const common = new Set(dictionary['passwords-common'].map((p) => p.toLowerCase()));
    expect(common.has('password')).toBe(true); // the list is the real one
    for (const u of DEMO_USERS) {
      expect(u.password.length).toBeGreaterThanOrEqual(12);
      expect(common.has(u.password.toLowerCase())).toBe(false);
    }
  });

  it('is idempotent, and --reset recreates the demo (audit history kept)', async () => {
    const db = a.client();
    const again = await seedDemo(db);
    expect(again.status).toBe('exists');
    expect(again.samples).toBe(rows.length);
    expect(await db.team.count()).toBe(1);
    expect(await db.sample.count()).toBe(rows.length);

    const team = await db.team.findFirstOrThrow({ where: { name: DEMO_TEAM_NAME } });
    const reset = await seedDemo(db, { reset: true });
    expect(reset.status).toBe('created');
    expect(reset.teamId).not.toBe(team.id);
    expect(await db.team.count()).toBe(1);
    expect(await db.user.count()).toBe(3);
    expect(await db.sample.count()).toBe(rows.length);
    expect(await db.auditEvent.count()).toBe(2);
  });
});

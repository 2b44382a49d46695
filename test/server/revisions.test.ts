// Revisions and the boundary (lib/server/revisions): per-revision metrics from the stored fits,
// settings-change marks, the diff of two revisions, reviewer agreement and the Boundary screen's
// points — on the test database harness (SQLite by default, PostgreSQL with
// BORDERLINE_TEST_DATABASE=postgres).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mintTeamScope } from '@/lib/server/authz/scope';
import type { Db } from '@/lib/server/db';
import { enqueueFitTx } from '@/lib/server/fits/enqueue';
import { inlineEngine } from '@/lib/server/fits/engine';
import { auditReport } from '@/lib/server/export/report';
import { decodeModel } from '@/lib/server/fits/model-codec';
import { processProject, resetFitMemory } from '@/lib/server/fits/run-fit';
import { agreementSummary, boundaryData, labelsAtRevision, revisionDiff, revisionTimeline, sampleDetail } from '@/lib/server/revisions';
import { createTestDatabase, type TestDatabase } from './db-harness';
import { createQueueFixture, type QueueFixture } from './queue-fixtures';

let t: TestDatabase;
let db: Db;
let f: QueueFixture;
const idOf = new Map<string, string>();

/** Deterministic jitter in [−0.5, 0.5) (a hash of i; every sample independent). */
function jitter(i: number, salt: number): number {
  const x = Math.sin(i * 12.9898 + salt * 78.233) * 43758.5453;
  return x - Math.floor(x) - 0.5;
}
// 80 samples: even i around x = −1.5 (true class a), odd i around x = +1.5 (true class b); y noise.
// Planted flips: s0005 and s0017 (b region, labelled a), s0042 (a region, labelled b).
const FLIPPED = new Set([5, 17, 42]);

async function runFit(revision: { id: string; number: number }): Promise<string> {
  const project = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
  await enqueueFitTx(db, project, revision);
  const out = await processProject(db, f.projectId, { engine: inlineEngine });
  expect(out?.status).toBe('done');
  return out?.fitId as string;
}

async function change(ext: string, revision: { id: string; number: number }, from: string, to: string, queueItemId: string | null): Promise<void> {
  const sampleId = idOf.get(ext) as string;
  await db.labelChange.create({ data: { projectId: f.projectId, sampleId, revisionId: revision.id, revisionNumber: revision.number, fromLabel: from, toLabel: to, queueItemId, decidedById: f.lead.userId } });
  await db.sample.update({ where: { id: sampleId }, data: { currentLabel: to, labelRevision: revision.number } });
}

let fit0 = '';
let fit1 = '';
const items: Record<string, string> = {};

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
  resetFitMemory();
  f = await createQueueFixture(db, {
    classes: ['a', 'b'],
    samples: 80,
    reviewers: 3,
    settings: { applyEvery: 0, queueCap: 20, pivotCap: 3, folds: 4, scale: 'standard', C: 1, kernel: 'linear', solver: 'smo' },
    features: (i) => [(i % 2 === 0 ? -1.5 : 1.5) + jitter(i, 1), jitter(i, 2) * 2],
    labels: (i) => ((i % 2 === 0) !== FLIPPED.has(i) ? 'a' : 'b'),
  });
  for (const s of await db.sample.findMany({ where: { projectId: f.projectId }, select: { id: true, externalId: true } })) idOf.set(s.externalId, s.id);
  const r0 = await db.revision.findUniqueOrThrow({ where: { projectId_number: { projectId: f.projectId, number: 0 } }, select: { id: true, number: true } });
  fit0 = await runFit(r0);

  // Queue items (round 9, clear of the fit's own items) and votes of reviewers R1, R2, R3.
  const [R1, R2, R3] = f.reviewers;
  const vote = async (item: string, userId: string, decision: 'keep' | 'relabel', label: string | null, day: string) =>
    db.vote.create({ data: { queueItemId: item, userId, decision, label, createdAt: new Date(`${day}T10:00:00.000Z`) } });
  for (const ext of ['s0005', 's0017', 's0042', 's0002', 's0004']) {
    const it = await db.queueItem.create({ data: { projectId: f.projectId, sampleId: idOf.get(ext) as string, round: 9, revisionNumber: 0, suspicion: 1, state: 'closed' } });
    items[ext] = it.id;
  }
  await vote(items.s0005, R1.userId, 'relabel', 'b', '2030-01-01');
  await vote(items.s0005, R2.userId, 'relabel', 'b', '2030-01-01');
  await vote(items.s0005, R3.userId, 'relabel', 'b', '2030-01-02');
  await vote(items.s0017, R1.userId, 'relabel', 'b', '2030-01-01');
  await vote(items.s0017, R2.userId, 'keep', null, '2030-01-01');
  await vote(items.s0042, R1.userId, 'relabel', 'a', '2030-01-01');
  await vote(items.s0042, R2.userId, 'keep', null, '2030-01-02');
  await vote(items.s0002, R1.userId, 'keep', null, '2030-01-02');
  await vote(items.s0002, R2.userId, 'keep', null, '2030-01-02');
  await vote(items.s0004, R1.userId, 'keep', null, '2030-01-02');
  await vote(items.s0004, R2.userId, 'keep', null, '2030-01-02');
  await db.queueItem.updateMany({ where: { id: { in: [items.s0017, items.s0042] } }, data: { tiebreakById: f.lead.userId } });

  // Revision 1 fixes the three flips; the settings change (C 1 → 10) before its fit.
  const r1 = await db.revision.create({ data: { projectId: f.projectId, number: 1, kind: 'review', changeCount: 3 }, select: { id: true, number: true } });
  await change('s0005', r1, 'a', 'b', items.s0005);
  await change('s0017', r1, 'a', 'b', items.s0017);
  await change('s0042', r1, 'b', 'a', items.s0042);
  const project = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
  await db.project.update({ where: { id: f.projectId }, data: { currentRevision: 1, settings: JSON.stringify({ ...JSON.parse(project.settings), C: 10 }) } });
  fit1 = await runFit(r1);

  // Revision 2 (not fitted) turns s0005 back to a.
  const r2 = await db.revision.create({ data: { projectId: f.projectId, number: 2, kind: 'review', changeCount: 1 }, select: { id: true, number: true } });
  await change('s0005', r2, 'b', 'a', null);
  await db.project.update({ where: { id: f.projectId }, data: { currentRevision: 2 } });
});
afterAll(async () => {
  await t?.drop();
});

describe('labels at a revision', () => {
  it('undoes later changes', async () => {
    const at0 = await labelsAtRevision(db, f.projectId, 0);
    const at1 = await labelsAtRevision(db, f.projectId, 1);
    const at2 = await labelsAtRevision(db, f.projectId, 2);
    expect([at0.get(idOf.get('s0005') as string), at1.get(idOf.get('s0005') as string), at2.get(idOf.get('s0005') as string)]).toEqual(['a', 'b', 'a']);
    expect([at0.get(idOf.get('s0042') as string), at1.get(idOf.get('s0042') as string)]).toEqual(['b', 'a']);
  });
});

describe('revision timeline', () => {
  it('reports each fitted revision\'s boundary numbers as stored, and marks the settings change', async () => {
    const tl = await revisionTimeline(db, f.scope, f.projectId);
    expect(tl).not.toBeNull();
    const revs = tl?.revisions ?? [];
    expect(revs.map((r) => r.number)).toEqual([0, 1, 2]);
    expect(revs[2].fit).toBeNull();
    expect(revs[0].settingsChanged).toEqual([]);
    expect(revs[1].settingsChanged).toEqual(['C']);
    expect([revs[0].fit?.settings.C, revs[1].fit?.settings.C]).toEqual([1, 10]);
    for (const [row, fitId] of [[revs[0], fit0], [revs[1], fit1]] as const) {
      expect(row.fit?.id).toBe(fitId);
      const fit = await db.fit.findUniqueOrThrow({ where: { id: fitId } });
      const model = decodeModel(fit.model as Uint8Array);
      const w = model.boundaries[0].w as Float64Array;
      // independent of the assembly: ‖w‖ from the stored primal weights, margin width 2/‖w‖
      const norm = Math.hypot(...Array.from(w));
      expect(row.boundaries[0].marginWidth).toBeCloseTo(2 / norm, 6);
      // counts from the stored standings (functional margin y·f(x) per sample)
      const st = await db.standing.findMany({ where: { fitId }, select: { margin: true, alpha: true } });
      expect(row.boundaries[0].wrongSide).toBe(st.filter((s) => s.margin < 0).length);
      expect(row.boundaries[0].supportVectors).toBe(st.filter((s) => s.alpha > 0).length);
      const hinge = st.reduce((acc, s) => acc + Math.max(0, 1 - s.margin), 0);
      expect(row.boundaries[0].hingeLoss).toBeCloseTo(hinge, 3);
    }
    // textbook fact: the three planted flips sit deep inside the other cluster, so no separating
    // line exists at revision 0 and each flip is misclassified out of fold (≤ 77/80 right);
    // with the flips fixed the two clusters (x ∈ [−2, −1] vs [1, 2]) are linearly separable.
    expect(revs[0].boundaries[0].hardMargin).toBe('not decided');
    expect(revs[0].boundaries[0].wrongSide).toBeGreaterThanOrEqual(3);
    expect(revs[0].boundaries[0].oofAccuracy as number).toBeLessThanOrEqual(77 / 80);
    expect(revs[1].boundaries[0].hardMargin).toBe('separable');
    expect(revs[1].boundaries[0].wrongSide).toBe(0);
    expect(revs[1].boundaries[0].oofAccuracy).toBe(1);
  });

  it('another team sees nothing', async () => {
    const other = await db.team.create({ data: { name: 'Elsewhere' } });
    const scope = mintTeamScope(other.id);
    expect(await revisionTimeline(db, scope, f.projectId)).toBeNull();
    expect(await revisionDiff(db, scope, f.projectId, 0, 1)).toBeNull();
    expect(await agreementSummary(db, scope, f.projectId)).toBeNull();
    expect(await boundaryData(db, scope, f.projectId, 0)).toBeNull();
    expect(await sampleDetail(db, scope, f.projectId, idOf.get('s0005') as string)).toBeNull();
  });
});

describe('revision diff', () => {
  it('lists the changed samples with from, to and who decided', async () => {
    const d01 = await revisionDiff(db, f.scope, f.projectId, 0, 1);
    expect(d01?.total).toBe(3);
    expect(d01?.entries.map((e) => [e.externalId, e.from, e.to])).toEqual([
      ['s0005', 'a', 'b'],
      ['s0017', 'a', 'b'],
      ['s0042', 'b', 'a'],
    ]);
    const s17 = d01?.entries.find((e) => e.externalId === 's0017');
    expect(s17?.votes.map((v) => [v.by, v.decision, v.label])).toEqual([
      ['Reviewer 1', 'relabel', 'b'],
      ['Reviewer 2', 'keep', null],
    ]);
    expect(s17?.tiebreakBy).toBe('Lead');
    expect(s17?.recordedBy).toBe('Lead');
  });

  it('a label changed and changed back is not a difference; order of the revisions does not matter', async () => {
    const d02 = await revisionDiff(db, f.scope, f.projectId, 2, 0);
    expect([d02?.from, d02?.to]).toEqual([0, 2]);
    expect(d02?.entries.map((e) => e.externalId)).toEqual(['s0017', 's0042']);
    const d12 = await revisionDiff(db, f.scope, f.projectId, 1, 2);
    expect(d12?.entries.map((e) => [e.externalId, e.from, e.to, e.recordedBy])).toEqual([['s0005', 'b', 'a', 'Lead']]);
  });
});

describe('agreement', () => {
  it('kappa per reviewer pair over the items both voted on', async () => {
    const a = await agreementSummary(db, f.scope, f.projectId);
    // hand-worked: R1 vs R2 over 5 items — ratings (keep → label at the item's revision 0):
    //   s0005 b/b, s0017 b/a, s0042 a/b, s0002 a/a, s0004 a/a → p_o = 3/5 = 0.6
    //   R1: b 2, a 3; R2: b 2, a 3 → p_e = (2/5)² + (3/5)² = 13/25 = 0.52
    //   κ = (0.6 − 0.52)/(1 − 0.52) = 0.08/0.48 = 1/6
    const r12 = a?.pairs.find((p) => p.a === 'Reviewer 1' && p.b === 'Reviewer 2');
    expect(r12?.items).toBe(5);
    expect(r12?.percent).toBeCloseTo(0.6, 12);
    expect(r12?.kappa).toBeCloseTo(1 / 6, 12);
    // R3 voted on s0005 only (b, like both others): one shared item each, full agreement
    const r13 = a?.pairs.find((p) => p.a === 'Reviewer 1' && p.b === 'Reviewer 3');
    expect([r13?.items, r13?.percent, r13?.kappa]).toEqual([1, 1, 1]);
    // hand-worked: agreeing vote pairs 3 + 1 + 1 of 5 + 1 + 1
    expect(a?.overallPercent).toBeCloseTo(5 / 7, 12);
    expect(a?.votePairs).toBe(7);
  });

  it('the audit report carries kappa per reviewer pair', async () => {
    const report = await auditReport(f.scope, f.projectId, { client: db });
    // the same hand-worked figures as above: κ = 1/6 over 5 shared items, 60 % agreement
    expect(report.reviewerPairs.find((p) => p.a === 'Reviewer 1' && p.b === 'Reviewer 2')).toEqual({ a: 'Reviewer 1', b: 'Reviewer 2', items: 5, percentAgreement: 60, cohensKappa: expect.closeTo(1 / 6, 12) });
    expect(report.reviewerPairs).toHaveLength(3);
  });

  it('original vs current confusion and votes per reviewer per day', async () => {
    const a = await agreementSummary(db, f.scope, f.projectId);
    // hand-worked: current labels = originals except s0017 a→b and s0042 b→a (s0005 went back to a).
    // originals: 40 + 2 flips labelled a (s0005, s0017) − 1 flip labelled b (s0042) → a 41, b 39.
    expect(a?.confusion.classes).toEqual(['a', 'b']);
    expect(a?.confusion.counts).toEqual([
      [40, 1],
      [1, 38],
    ]);
    expect(a?.throughput).toEqual([
      { reviewer: 'Reviewer 1', day: '2030-01-01', votes: 3 },
      { reviewer: 'Reviewer 2', day: '2030-01-01', votes: 2 },
      { reviewer: 'Reviewer 1', day: '2030-01-02', votes: 2 },
      { reviewer: 'Reviewer 2', day: '2030-01-02', votes: 3 },
      { reviewer: 'Reviewer 3', day: '2030-01-02', votes: 1 },
    ]);
  });
});

describe('boundary data', () => {
  it('places every sample of the newest fit, with the band at ±1/‖w‖', async () => {
    const r = await boundaryData(db, f.scope, f.projectId, 0);
    expect(r?.kind).toBe('ok');
    if (r?.kind !== 'ok') return;
    const d = r.data;
    expect(d.fitId).toBe(fit1);
    expect(d.revision).toBe(1);
    expect(d.points).toHaveLength(80);
    expect(d.vertical).toBe('orthogonal-to-w');
    expect(d.band as number).toBeCloseTo((d.marginWidth as number) / 2, 9);
    // labels at revision 1: all flips fixed → 40 of each class
    expect(d.points.filter((p) => p.c === 0)).toHaveLength(40);
    // the horizontal coordinate is the stored signed distance (float32 decision / ‖w‖)
    const st = await db.standing.findMany({ where: { fitId: fit1 }, select: { sampleId: true, distance: true } });
    const byId = new Map(st.map((s) => [s.sampleId, s.distance]));
    for (const p of d.points) expect(Math.abs(p.x)).toBeCloseTo(Math.abs(byId.get(p.id) as number), 4);
    // textbook fact: with w ≈ along the first feature, the vertical axis is the second feature's
    // direction; the two classes sit on opposite sides of the hyperplane (separable at revision 1)
    const aSide = d.points.filter((p) => d.classes[p.c] === d.positive).every((p) => p.x > 0);
    expect(aSide).toBe(true);
    expect(d.points.every((p) => (p.f & 1) === 0)).toBe(true);
  });

  it('large projects: the picture gets a subset (outlined samples first), the histogram every sample', async () => {
    const full = await boundaryData(db, f.scope, f.projectId, 0);
    const cut = await boundaryData(db, f.scope, f.projectId, 0, { maxPicturePoints: 20 });
    if (full?.kind !== 'ok' || cut?.kind !== 'ok') throw new Error('expected a fit');
    expect(cut.data.points).toHaveLength(20);
    expect(cut.data.total).toBe(80);
    expect(cut.data.histogram.x).toHaveLength(80);
    expect(cut.data.histogram.x).toEqual(full.data.histogram.x);
    const outlined = full.data.points.filter((p) => (p.f & 3) !== 0).map((p) => p.id);
    expect(cut.data.outlined).toBe(outlined.length);
    const shown = new Set(cut.data.points.map((p) => p.id));
    for (const id of outlined.slice(0, 10)) expect(shown.has(id)).toBe(true);
    // the same sample has the same signed distance in the subset
    const xOf = new Map(full.data.points.map((p) => [p.id, p.x]));
    for (const p of cut.data.points) expect(p.x).toBeCloseTo(xOf.get(p.id) as number, 12);
  });

  it('no fit: says so', async () => {
    const g = await createQueueFixture(db, { samples: 6 });
    const r = await boundaryData(db, g.scope, g.projectId, 0);
    expect(r).toEqual({ kind: 'no-fit', projectName: 'Queue test', currentRevision: 0, pending: false });
  });
});

describe('a pair of classes (multi-class fit)', () => {
  it('shows the two classes against f_A − f_B, at the distance computed from the stored model', async () => {
    // three clusters on a triangle: a around (−2, 0), b around (2, 0), c around (0, 3)
    const centres: Record<string, [number, number]> = { a: [-2, 0], b: [2, 0], c: [0, 3] };
    const labelOf = (i: number) => ['a', 'b', 'c'][i % 3];
    const feats = (i: number) => {
      const [cx, cy] = centres[labelOf(i)];
      return [cx + jitter(i, 3), cy + jitter(i, 4)];
    };
    const g = await createQueueFixture(db, { classes: ['a', 'b', 'c'], samples: 45, settings: { pivotCap: 0, folds: 3, kernel: 'linear', solver: 'smo', scale: 'none', C: 1 }, features: feats, labels: labelOf });
    const project = await db.project.findUniqueOrThrow({ where: { id: g.projectId } });
    const r0 = await db.revision.findUniqueOrThrow({ where: { projectId_number: { projectId: g.projectId, number: 0 } }, select: { id: true, number: true } });
    await enqueueFitTx(db, project, r0);
    expect((await processProject(db, g.projectId, { engine: inlineEngine }))?.status).toBe('done');
    const r = await boundaryData(db, g.scope, g.projectId, { kind: 'pair', a: 'a', b: 'b' });
    if (r?.kind !== 'ok') throw new Error('expected a fit');
    const d = r.data;
    expect(d.pair).toEqual(['a', 'b']);
    expect(d.band).toBeNull();
    expect(d.points).toHaveLength(30); // 15 a + 15 b, the c samples left out
    expect(new Set(d.points.map((p) => d.classes[p.c]))).toEqual(new Set(['a', 'b']));
    // independent path: features (scale none) → w_a·x + b_a − (w_b·x + b_b), divided by ‖w_a − w_b‖
    const fit = await db.fit.findFirstOrThrow({ where: { projectId: g.projectId, status: 'done' } });
    const model = decodeModel(fit.model as Uint8Array);
    const A = model.boundaries.find((x) => x.positive === 'a');
    const B = model.boundaries.find((x) => x.positive === 'b');
    const wa = A?.w as Float64Array;
    const wb = B?.w as Float64Array;
    const norm = Math.hypot(wa[0] - wb[0], wa[1] - wb[1]);
    const ext = new Map((await db.sample.findMany({ where: { projectId: g.projectId }, select: { id: true, externalId: true } })).map((s) => [s.id, Number(s.externalId.slice(1))]));
    for (const p of d.points) {
      const [x0, x1] = feats(ext.get(p.id) as number).map((v) => Math.fround(v));
      const gx = wa[0] * x0 + wa[1] * x1 + (A?.b ?? 0) - (wb[0] * x0 + wb[1] * x1 + (B?.b ?? 0));
      expect(p.x).toBeCloseTo(gx / norm, 4);
    }
    // textbook fact: well-separated clusters — every a sample is scored above b by the a-vs-rest
    // and b-vs-rest boundaries' difference, and vice versa, so nobody is on the wrong side
    expect(d.points.filter((p) => p.f & 1)).toHaveLength(0);
  });
});

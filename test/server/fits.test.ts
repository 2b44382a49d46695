// The refit service: coalescing, one running fit per project, stale-result protection, warm
// starts, the queue rebuild after a fit, the worker-thread engine and the in-process job queue.
// Rules under test are the ones stated in lib/server/fits/jobs.ts and lib/server/queue/build.ts.
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import type { Db } from '@/lib/server/db';
import { enqueueFitTx } from '@/lib/server/fits/enqueue';
import { inlineEngine, persistentWorkerEngine, workerEngine, type EngineRunner } from '@/lib/server/fits/engine';
import { InProcessFitQueue } from '@/lib/server/fits/in-process';
import { setFitJobQueue } from '@/lib/server/fits/jobs';
import { processProject, resetFitMemory, runClaimedFit, type ProcessOutcome } from '@/lib/server/fits/run-fit';
import { decodeModel } from '@/lib/server/fits/model-codec';
import { inlineStandingsWriter, workerStandingsWriter, type StandingColumns } from '@/lib/server/fits/standings-writer';
import { castVote } from '@/lib/server/queue/vote';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';
import { PRUNE_RANGE_SQL } from '@/lib/server/fits/standings-keys';
import { createQueueFixture, type QueueFixture } from './queue-fixtures';

let t: TestDatabase;
let db: Db;

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
});
afterAll(async () => {
  setFitJobQueue(null);
  await t.drop();
});
beforeEach(() => resetFitMemory());

/** Deterministic jitter in [−0.5, 0.5) (a hash of i, not a PRNG stream: every sample is independent). */
function jitter(i: number, salt: number): number {
  const x = Math.sin(i * 12.9898 + salt * 78.233) * 43758.5453;
  return x - Math.floor(x) - 0.5;
}

/**
 * 80 samples, two classes along x: "a" around x = −1.5, "b" around x = +1.5 (y is noise), and
 * three planted flips deep inside the other class (ids s0005, s0017, s0042).
 */
const FLIPPED = new Set([5, 17, 42]);
async function twoClassProject(settings: Record<string, unknown> = {}): Promise<QueueFixture> {
  return createQueueFixture(db, {
    classes: ['a', 'b'],
    samples: 80,
    settings: { applyEvery: 1, queueCap: 20, pivotCap: 5, folds: 4, scale: 'standard', ...settings },
    features: (i) => [(i % 2 === 0 ? -1.5 : 1.5) + jitter(i, 1), jitter(i, 2) * 2],
    labels: (i) => ((i % 2 === 0) !== FLIPPED.has(i) ? 'a' : 'b'),
  });
}

async function addRevision(f: QueueFixture, number: number): Promise<{ id: string; number: number }> {
  const r = await db.revision.create({ data: { projectId: f.projectId, number, kind: 'update' }, select: { id: true, number: true } });
  await db.project.update({ where: { id: f.projectId }, data: { currentRevision: number } });
  return r;
}

async function queueFit(f: QueueFixture, revision: { id: string; number: number }): Promise<string> {
  const project = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
  return enqueueFitTx(db, project, revision);
}

async function revision0(f: QueueFixture) {
  return db.revision.findUniqueOrThrow({ where: { projectId_number: { projectId: f.projectId, number: 0 } }, select: { id: true, number: true } });
}

/** An engine whose jobs wait until `open()` is called. */
function gatedEngine(): EngineRunner & { open: () => void; entered: Promise<void> } {
  let open: () => void = () => {};
  let entered: () => void = () => {};
  const gate = new Promise<void>((r) => (open = r));
  const enteredP = new Promise<void>((r) => (entered = r));
  return {
    name: 'gated',
    open,
    entered: enteredP,
    audit: async (data, settings, onProgress, signal) => {
      entered();
      await gate;
      return inlineEngine.audit(data, settings, onProgress, signal);
    },
    fit: async (data, settings, onProgress, signal) => {
      entered();
      await gate;
      return inlineEngine.fit(data, settings, onProgress, signal);
    },
    select: inlineEngine.select,
  };
}

describe('a fit', () => {
  it('stores standings for every sample, metrics and a model, and builds the queue from the flagged samples', async () => {
    const f = await twoClassProject();
    await queueFit(f, await revision0(f));
    const out = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(out?.status).toBe('done');
    const fit = await db.fit.findUniqueOrThrow({ where: { id: out?.fitId } });
    expect([fit.status, fit.progress, fit.formulation]).toEqual(['done', 1, 'smo-unregularised-bias']);
    expect(await db.standing.count({ where: { fitId: fit.id } })).toBe(80);
    const metrics = JSON.parse(fit.metrics ?? '{}') as { classes: string[]; pass: string; samples: number; boundaries: unknown[] };
    expect([metrics.classes, metrics.pass, metrics.samples, metrics.boundaries.length]).toEqual([['a', 'b'], 'full', 80, 1]);
    const model = decodeModel(fit.model as Uint8Array);
    expect(model.header.sampleIds).toHaveLength(80);
    expect(model.boundaries[0].alpha).toHaveLength(80);
    // The three planted flips sit deep on the wrong side (textbook: a point of class b among the
    // a's has y·f(x) < 0 for any reasonable separator of the two clusters) — they head the queue.
    const items = await db.queueItem.findMany({ where: { projectId: f.projectId }, orderBy: { suspicion: 'desc' }, include: { sample: true } });
    expect(items.length).toBeGreaterThanOrEqual(3);
    expect(items.length).toBeLessThanOrEqual(20);
    expect(new Set(items.slice(0, 3).map((i) => i.sample.externalId))).toEqual(new Set(['s0005', 's0017', 's0042']));
    for (const it of items) {
      expect(it.fitId).toBe(fit.id);
      expect(it.reasons.length).toBeGreaterThan(0);
    }
    const flipped = await db.standing.findMany({ where: { fitId: fit.id, sample: { externalId: { in: ['s0005', 's0017', 's0042'] } } } });
    for (const s of flipped) {
      expect(s.flags.split(',')).toContain('wrong-side');
      expect(s.margin).toBeLessThan(0);
      expect(s.oofMargin).not.toBeNull();
    }
  });

  it('coalesces: of queued fits for revisions 1, 2 and 3 only revision 3 runs', async () => {
    const f = await twoClassProject();
    const ids = [];
    for (const n of [1, 2, 3]) ids.push(await queueFit(f, await addRevision(f, n)));
    const out = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(out?.revisionNumber).toBe(3);
    expect(out?.status).toBe('done');
    const fits = await db.fit.findMany({ where: { id: { in: ids } }, orderBy: { revisionNumber: 'asc' } });
    expect(fits.map((x) => x.status)).toEqual(['superseded', 'superseded', 'done']);
    expect(fits[0].error).toBe('coalesced into the fit of revision 3');
    expect(await processProject(db, f.projectId, { engine: inlineEngine })).toBeNull();
  });

  it('runs one fit per project at a time', async () => {
    const f = await twoClassProject();
    const first = await queueFit(f, await revision0(f));
    const engine = gatedEngine();
    const running = processProject(db, f.projectId, { engine });
    await engine.entered;
    const second = await queueFit(f, await addRevision(f, 1));
    // While revision 0 runs, nothing else starts for this project.
    expect(await processProject(db, f.projectId, { engine: inlineEngine })).toBeNull();
    expect((await db.fit.findUniqueOrThrow({ where: { id: second } })).status).toBe('queued');
    engine.open();
    expect((await running)?.fitId).toBe(first);
    expect((await processProject(db, f.projectId, { engine: inlineEngine }))?.fitId).toBe(second);
  });

  it('a fit of revision 5 finishing after the fit of revision 6 is marked superseded and overwrites nothing', async () => {
    const f = await twoClassProject();
    for (const n of [1, 2, 3, 4]) await addRevision(f, n);
    const r5 = await addRevision(f, 5);
    const fit5 = await queueFit(f, r5);
    // Worker one claims revision 5 and is slow.
    const slow = gatedEngine();
    const claimed5 = await db.fit.update({ where: { id: fit5 }, data: { status: 'running' }, select: { id: true, revisionNumber: true, settings: true, createdAt: true } });
    const run5 = runClaimedFit(db, f.projectId, claimed5, { engine: slow });
    await slow.entered;
    // Meanwhile revision 6 arrives and a second worker fits it to completion.
    const r6 = await addRevision(f, 6);
    const fit6 = await queueFit(f, r6);
    const claimed6 = await db.fit.update({ where: { id: fit6 }, data: { status: 'running' }, select: { id: true, revisionNumber: true, settings: true, createdAt: true } });
    const out6 = await runClaimedFit(db, f.projectId, claimed6, { engine: inlineEngine });
    expect(out6.status).toBe('done');
    const itemsAfter6 = await db.queueItem.findMany({ where: { projectId: f.projectId }, select: { id: true, fitId: true, suspicion: true } });
    // Now revision 5's fit finishes.
    slow.open();
    const out5 = await run5;
    expect(out5.status).toBe('superseded');
    const row5 = await db.fit.findUniqueOrThrow({ where: { id: fit5 } });
    expect([row5.status, row5.error, row5.metrics, row5.model]).toEqual(['superseded', 'a fit of revision 6 completed first', null, null]);
    expect(await db.standing.count({ where: { fitId: fit5 } })).toBe(0);
    // The queue still comes from revision 6's fit, untouched.
    const itemsAfter5 = await db.queueItem.findMany({ where: { projectId: f.projectId }, select: { id: true, fitId: true, suspicion: true } });
    expect(itemsAfter5).toEqual(itemsAfter6);
    expect(new Set(itemsAfter5.map((i) => i.fitId))).toEqual(new Set([fit6]));
  });

  it('after agreed relabels are applied, the refit is warm-started, the relabelled sample moves, and closed items stay closed', async () => {
    const f = await twoClassProject({ applyEvery: 1 });
    await queueFit(f, await revision0(f));
    const first = await processProject(db, f.projectId, { engine: inlineEngine });
    const s17 = await db.sample.findFirstOrThrow({ where: { projectId: f.projectId, externalId: 's0017' } });
    const item = await db.queueItem.findFirstOrThrow({ where: { sampleId: s17.id, state: 'open' } });
    const before = await db.standing.findFirstOrThrow({ where: { fitId: first?.fitId, sampleId: s17.id } });
    // s0017: odd index → feature cluster of "b", planted label "a"
    expect(s17.currentLabel).toBe('a');
    const [a, b] = f.reviewers;
    await castVote({ db }, f.scope, a, { projectId: f.projectId, itemId: item.id, decision: 'relabel', label: 'b' });
    const vote = await castVote({ db }, f.scope, b, { projectId: f.projectId, itemId: item.id, decision: 'relabel', label: 'b' });
    expect(vote.applied?.revisionNumber).toBe(1);
    const second = await processProject(db, f.projectId, { engine: inlineEngine });
    expect([second?.status, second?.revisionNumber]).toEqual(['done', 1]);
    const fit = await db.fit.findUniqueOrThrow({ where: { id: second?.fitId } });
    expect(fit.warmFromFitId).toBe(first?.fitId);
    expect((JSON.parse(fit.metrics ?? '{}') as { warmStarted: boolean }).warmStarted).toBe(true);
    const after = await db.standing.findFirstOrThrow({ where: { fitId: fit.id, sampleId: s17.id } });
    expect(before.margin).toBeLessThan(0);
    expect(after.margin).toBeGreaterThan(0); // now labelled b, inside the b cluster: right side
    expect(after.flags.split(',')).not.toContain('wrong-side');
    const items17 = await db.queueItem.findMany({ where: { sampleId: s17.id } });
    expect(items17.map((i) => [i.state, i.outcome, i.appliedRevision])).toEqual([['closed', 'relabelled', 1]]);
  });

  it('items with votes survive a rebuild even when no longer flagged; vote-less items that drop out are removed', async () => {
    const f = await twoClassProject({ queueCap: 20 });
    await queueFit(f, await revision0(f));
    await processProject(db, f.projectId, { engine: inlineEngine });
    // A comfortable sample (s0010: class a, in the a cluster) gets an item by hand, with one vote,
    // and another one without votes.
    const s10 = await db.sample.findFirstOrThrow({ where: { projectId: f.projectId, externalId: 's0010' } });
    const s12 = await db.sample.findFirstOrThrow({ where: { projectId: f.projectId, externalId: 's0012' } });
    const withVote = await db.queueItem.create({ data: { projectId: f.projectId, sampleId: s10.id, revisionNumber: 0, suspicion: 0.01 } });
    const voteless = await db.queueItem.create({ data: { projectId: f.projectId, sampleId: s12.id, revisionNumber: 0, suspicion: 0.01 } });
    await castVote({ db }, f.scope, f.reviewers[0], { projectId: f.projectId, itemId: withVote.id, decision: 'keep' });
    await queueFit(f, await addRevision(f, 1));
    const out = await processProject(db, f.projectId, { engine: inlineEngine });
    const kept = await db.queueItem.findUnique({ where: { id: withVote.id } });
    expect(kept?.state).toBe('one-vote');
    expect(kept?.fitId).toBe(out?.fitId); // re-scored by the new fit
    // …with the new fit's score of its sample (its stored standing), not the hand-set 0.01.
    const standing = await db.standing.findFirstOrThrow({ where: { fitId: out?.fitId, sampleId: s10.id } });
    expect(kept?.suspicion).toBe(standing.suspicion);
    expect(kept?.suspicion).not.toBe(0.01);
    expect(await db.queueItem.findUnique({ where: { id: voteless.id } })).toBeNull();
  });

  it('respects the queue cap', async () => {
    const f = await twoClassProject({ queueCap: 2 });
    await queueFit(f, await revision0(f));
    await processProject(db, f.projectId, { engine: inlineEngine });
    expect(await db.queueItem.count({ where: { projectId: f.projectId } })).toBe(2);
  });

  // lib/server/queue/build.ts refreshQueueStatistics: the claim of "next" is planned from these
  // statistics (without them PostgreSQL walked every queue item to find the caller's own lease).
  // This machine's server runs with autovacuum off, so nothing else analyses the table here.
  it.skipIf(TEST_PROVIDER !== 'postgresql')('refreshes the queue table\'s planner statistics once the queue is rebuilt (PostgreSQL)', async () => {
    const analyses = async () => {
      await db.$queryRaw`SELECT pg_stat_clear_snapshot()::text`;
      const rows = await db.$queryRaw<{ n: bigint | number }[]>`SELECT analyze_count + autoanalyze_count AS n FROM pg_stat_user_tables WHERE relname = 'QueueItem'`;
      return Number(rows[0]?.n ?? 0);
    };
    const f = await twoClassProject();
    await queueFit(f, await revision0(f));
    const before = await analyses();
    const out = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(out?.status).toBe('done');
    expect(await analyses()).toBe(before + 1);
    const stats = await db.$queryRaw<{ attname: string }[]>`SELECT attname FROM pg_stats WHERE tablename = 'QueueItem' AND attname = 'leaseUserId'`;
    expect(stats).toHaveLength(1);
  });

  it('fails cleanly with one class only', async () => {
    const f = await createQueueFixture(db, { classes: ['only'], samples: 10 });
    await queueFit(f, await revision0(f));
    const out = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(out?.status).toBe('failed');
    expect((await db.fit.findUniqueOrThrow({ where: { id: out?.fitId } })).error).toBe('A fit needs samples of at least two classes.');
  });
});

describe('warm start from the previous solution (linear DCD, same rows)', () => {
  // model.ts WarmBoundary.previous: the worker that ran the previous fit keeps its solution in
  // memory; any other process reads it back from Fit.model (decision values and training classes
  // are stored with it). Either way a refit of the same rows starts the solver from that solution.
  const starts = async (fitId: string | undefined) => {
    const fit = await db.fit.findUniqueOrThrow({ where: { id: fitId } });
    return (JSON.parse(fit.metrics ?? '{}') as { boundaries: { start: string | null }[] }).boundaries.map((b) => b.start);
  };
  it.each([
    ['in the same process', false],
    ['in another process (from the stored model)', true],
  ] as const)('%s', async (_, restart) => {
    const f = await twoClassProject({ applyEvery: 1, scale: 'none', solver: 'dcd' });
    await queueFit(f, await revision0(f));
    const first = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(first?.status).toBe('done');
    expect(await starts(first?.fitId)).toEqual(['cold']);
    if (restart) resetFitMemory();
    await queueFit(f, await addRevision(f, 1));
    const second = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(second?.status).toBe('done');
    expect(await starts(second?.fitId)).toEqual(['solution']);
  });
});

describe('warm start after a restart', () => {
  // A process that did not run the previous fit (a worker, or the app after a restart) takes the
  // warm start from the stored model; the model records the project's scaling, an l2 project's
  // rows being normalised before the engine sees them.
  it.each(['standard', 'l2', 'none'] as const)('scaling %s: the refit is warm-started from the stored model', async (scale) => {
    const f = await twoClassProject({ applyEvery: 1, scale });
    await queueFit(f, await revision0(f));
    const first = await processProject(db, f.projectId, { engine: inlineEngine });
    expect(first?.status).toBe('done');
    resetFitMemory();
    await queueFit(f, await addRevision(f, 1));
    const second = await processProject(db, f.projectId, { engine: inlineEngine });
    const fit = await db.fit.findUniqueOrThrow({ where: { id: second?.fitId } });
    expect(fit.warmFromFitId).toBe(first?.fitId);
    expect((JSON.parse(fit.metrics ?? '{}') as { warmStarted: boolean }).warmStarted).toBe(true);
  });
});

describe('quick passes and engines', () => {
  it('a large project gets a warm quick pass with held-out values carried from the last full pass (also after a restart), then a full pass', async () => {
    const f = await twoClassProject({ applyEvery: 1 });
    await queueFit(f, await revision0(f));
    // quickPassCells 100 makes this 80 × 2 project count as "large".
    const options = { engine: inlineEngine, quickPassCells: 100 };
    const first = await processProject(db, f.projectId, options);
    expect(first?.pass).toBe('full');
    resetFitMemory(); // as after a restart: the carried values must come from the stored model
    const s5 = await db.sample.findFirstOrThrow({ where: { projectId: f.projectId, externalId: 's0005' } });
    const item = await db.queueItem.findFirstOrThrow({ where: { sampleId: s5.id } });
    // s0005: odd index → the "b" cluster, planted label "a"
    expect(s5.currentLabel).toBe('a');
    await castVote({ db }, f.scope, f.reviewers[0], { projectId: f.projectId, itemId: item.id, decision: 'relabel', label: 'b' });
    await castVote({ db }, f.scope, f.reviewers[1], { projectId: f.projectId, itemId: item.id, decision: 'relabel', label: 'b' });
    const quick = await processProject(db, f.projectId, options);
    expect([quick?.pass, quick?.status, quick?.revisionNumber]).toEqual(['quick', 'done', 1]);
    const fit = await db.fit.findUniqueOrThrow({ where: { id: quick?.fitId } });
    const metrics = JSON.parse(fit.metrics ?? '{}') as { oofCarriedFrom: string; warmStarted: boolean };
    expect(metrics.oofCarriedFrom).toBe(first?.fitId);
    expect(metrics.warmStarted).toBe(true);
    // s0005 is now labelled "b", its own cluster: its carried held-out decision, re-read for the
    // new label, puts it on the right side.
    const st = await db.standing.findFirstOrThrow({ where: { fitId: fit.id, sampleId: s5.id } });
    expect(st.oofMargin).toBeGreaterThan(0);
    expect(st.margin).toBeGreaterThan(0);
    // A full pass of the same revision was queued behind it, and it replaces the quick one.
    const followUp = await db.fit.findFirstOrThrow({ where: { projectId: f.projectId, status: 'queued' } });
    expect(followUp.revisionNumber).toBe(1);
    expect((JSON.parse(followUp.settings) as { followUp: boolean }).followUp).toBe(true);
    // It waits while the project is busy (a revision younger than the quiet period) …
    expect(await processProject(db, f.projectId, options)).toBeNull();
    // … and runs once it is quiet.
    const full = await processProject(db, f.projectId, { ...options, followUpQuietMs: 0 });
    expect([full?.pass, full?.status]).toEqual(['full', 'done']);
  });

  it('the worker-thread engines give the same standings as the inline engine', async () => {
    const margins: number[][] = [];
    for (const engine of [inlineEngine, workerEngine(), persistentWorkerEngine()]) {
      // A project of its own per engine, so every fit is cold and the three are comparable bit for bit.
      const f = await twoClassProject();
      await queueFit(f, await revision0(f));
      const out = await processProject(db, f.projectId, { engine });
      expect(out?.status).toBe('done');
      const rows = await db.standing.findMany({ where: { fitId: out?.fitId }, include: { sample: true } });
      margins.push(rows.sort((a, b) => (a.sample.externalId < b.sample.externalId ? -1 : 1)).map((r) => r.margin));
    }
    expect(margins[1]).toEqual(margins[0]);
    expect(margins[2]).toEqual(margins[0]);
  });
});

describe('standings writers', () => {
  it('the writer thread stores the same rows as the inline writer', async () => {
    type Row = { margin: number; distance: number; slack: number; alpha: number; svKind: string; oofMargin: number | null; flags: string; suspicion: number; detail: string; predicted: string };
    const byWriter: Map<string, Row>[] = [];
    for (const standingsWriter of [inlineStandingsWriter(db), workerStandingsWriter(t.config)]) {
      const f = await twoClassProject();
      await queueFit(f, await revision0(f));
      const out = await processProject(db, f.projectId, { engine: inlineEngine, standingsWriter });
      expect(out?.status).toBe('done');
      const rows = await db.standing.findMany({ where: { fitId: out?.fitId }, include: { sample: true } });
      expect(rows).toHaveLength(80);
      // The model went through the same writer: stored whole, and it decodes to this fit's samples.
      const stored = await db.fit.findUniqueOrThrow({ where: { id: out?.fitId }, select: { model: true } });
      const decoded = decodeModel(stored.model ?? new Uint8Array());
      expect(new Set(decoded.header.sampleIds)).toEqual(new Set(rows.map((r) => r.sampleId)));
      expect(decoded.boundaries[0].alpha).toHaveLength(80);
      expect(rows.every((r) => r.id.startsWith(`${out?.fitId}:`))).toBe(true);
      byWriter.push(
        new Map(
          rows.map((r) => [
            r.sample.externalId,
            {
              margin: r.margin,
              distance: r.distance,
              slack: r.slack,
              alpha: r.alpha,
              svKind: r.svKind,
              oofMargin: r.oofMargin,
              flags: r.flags,
              suspicion: r.suspicion,
              detail: Buffer.from(r.detail ?? new Uint8Array()).toString('hex'),
              predicted: r.predicted,
            },
          ]),
        ),
      );
    }
    expect([...byWriter[1].entries()].sort()).toEqual([...byWriter[0].entries()].sort());
  });
});

describe('the standings writers store the same rows', () => {
  it('class names with tab, newline, carriage return and backslash, null and clamped numbers, detail bytes: the writer thread (COPY on PostgreSQL) stores what the inline INSERT stores', async () => {
    const f = await twoClassProject();
    const samples = (await db.sample.findMany({ where: { projectId: f.projectId }, orderBy: { id: 'asc' }, select: { id: true } })).slice(0, 5).map((x) => x.id);
    const rev = await revision0(f);
    const fitFor = async () => (await db.fit.create({ data: { projectId: f.projectId, revisionId: rev.id, revisionNumber: 0, status: 'done', settings: '{}' } })).id;
    const n = samples.length;
    // Hand-made values: every special character COPY's text format escapes, a value printed with an
    // exponent, NaN (stored as null / 0), ±Infinity (clamped to ±1e30), a negative zero.
    const columns: StandingColumns = {
      sampleIds: samples,
      classes: ['tab\there', 'line\nbreak', 'back\\slash \\N', 'cr\rend', 'plain'],
      margin: Float64Array.from([0.1, -2.5e-12, NaN, Infinity, -0]),
      distance: Float64Array.from([1 / 3, 1e300, -Infinity, 0, 7]),
      slack: Float64Array.from([0, 0.25, 0, 1.5, 0]),
      alpha: Float64Array.from([0, 1, 0.5, 0, 1e-9]),
      support: Uint8Array.from([0, 1, 2, 0, 1]),
      oofMargin: Float64Array.from([NaN, 0.5, -0.75, NaN, 1e-7]),
      flags: Uint8Array.from([0, 1, 3, 7, 2]),
      suspicion: Float64Array.from([0.9, 0.1, 0.5, 0, 1]),
      predicted: Int32Array.from([0, 1, 2, 3, 4]),
      detail: Float32Array.from([0.5, NaN, -1.25, 3, 0, 0, 1e-3, -7, 2, 2]),
      detailWidth: 2,
    };
    const stored = async (fitId: string) =>
      (await db.standing.findMany({ where: { fitId }, orderBy: { id: 'asc' } })).map((r) => ({ ...r, id: r.id.slice(fitId.length), fitId: null, detail: r.detail ? Buffer.from(r.detail).toString('hex') : null }));
    const inlineFit = await fitFor();
    const threadFit = await fitFor();
    expect(await inlineStandingsWriter(db).write(inlineFit, columns)).toBe(n);
    const thread = workerStandingsWriter(t.config);
    expect(await thread.write(threadFit, columns)).toBe(n);
    const a = await stored(inlineFit);
    const b = await stored(threadFit);
    expect(b).toEqual(a);
    // And both are the values themselves (not merely the same as each other).
    expect(a.map((r) => r.predicted)).toEqual(columns.classes);
    // (negative zero is stored as zero by both: JavaScript prints -0 as "0", the INSERT's drivers send 0)
    expect(a.map((r) => r.margin)).toEqual([0.1, -2.5e-12, 0, 1e30, 0]);
    expect(a.map((r) => r.distance)).toEqual([1 / 3, 1e300, -1e30, 0, 7]);
    expect(a.map((r) => r.oofMargin)).toEqual([null, 0.5, -0.75, null, 1e-7]);
    const detail0 = new Float32Array(Uint8Array.from(Buffer.from(a[0].detail as string, 'hex')).buffer);
    expect([...detail0].map((x) => (Number.isNaN(x) ? 'NaN' : x))).toEqual([0.5, 'NaN']);
  });
});

describe('pruning old standings', () => {
  // Standings are keyed `<fitId>:<row>` (lib/server/fits/standings-keys.ts) and pruned by key range
  // alone; these checks hold both writers to "exactly the named fits' rows go".
  it('both writers delete every standing of the named fits, legacy keys included, and no other fit\'s', async () => {
    for (const writer of [inlineStandingsWriter(db), workerStandingsWriter(t.config)]) {
      const f = await twoClassProject();
      const fits: string[] = [];
      for (let k = 0; k < 3; k++) {
        await queueFit(f, await revision0(f));
        const out = await processProject(db, f.projectId, { engine: inlineEngine, standingsWriter: writer, followUp: false });
        expect(out?.status).toBe('done');
        fits.push(out?.fitId as string);
      }
      // A row under a key of an older format (a plain cuid) belongs to the middle fit too.
      const sample = await db.sample.findFirstOrThrow({ where: { projectId: f.projectId }, select: { id: true } });
      await db.standing.deleteMany({ where: { fitId: fits[1], sampleId: sample.id } });
      await db.standing.create({ data: { id: 'legacyrowkey00000000000001', fitId: fits[1], sampleId: sample.id, margin: 1, distance: 1, slack: 0, alpha: 0, svKind: 'none', flags: '', suspicion: 0, predicted: 'a' } });
      const before = await Promise.all(fits.map((id) => db.standing.count({ where: { fitId: id } })));
      expect(before).toEqual([80, 80, 80]);
      expect(await writer.prune([fits[1]])).toBe(80);
      const after = await Promise.all(fits.map((id) => db.standing.count({ where: { fitId: id } })));
      expect(after).toEqual([80, 0, 80]);
    }
  });

  it.runIf(TEST_PROVIDER === 'sqlite')('on SQLite a range statement walks the primary key, not the rows of the fit', async () => {
    // SQLite plans the statement once; with a fitId condition it chose the (fitId, suspicion) index.
    const plan = await db.$queryRawUnsafe<{ detail: string }[]>(`EXPLAIN QUERY PLAN ${PRUNE_RANGE_SQL.sqlite}`, 'a', 'b');
    expect(plan.map((p) => p.detail).join(' | ')).toMatch(/^SEARCH Standing USING (COVERING )?INDEX sqlite_autoindex_Standing_1 \(id>\? AND id<\?\)$/);
  });
});

describe('the in-process job queue', () => {
  it('runs queued fits in a worker thread, writes progress, and coalesces a burst', async () => {
    const f = await twoClassProject();
    const outcomes: ProcessOutcome[] = [];
    const queue = new InProcessFitQueue(db, { engine: persistentWorkerEngine(), pollMs: 60_000, onOutcome: (_p, o) => outcomes.push(o) });
    setFitJobQueue(queue);
    // A burst of three revisions before the worker starts: one fit runs.
    const ids = [];
    for (const n of [1, 2, 3]) ids.push(await queueFit(f, await addRevision(f, n)));
    await queue.start();
    await queue.idle(f.projectId);
    expect(outcomes.map((o) => [o.revisionNumber, o.status])).toEqual([[3, 'done']]);
    const fits = await db.fit.findMany({ where: { id: { in: ids } }, orderBy: { revisionNumber: 'asc' } });
    expect(fits.map((x) => x.status)).toEqual(['superseded', 'superseded', 'done']);
    expect(fits[2].progress).toBe(1);
    expect(await db.queueItem.count({ where: { projectId: f.projectId, fitId: fits[2].id } })).toBeGreaterThan(0);
    await queue.stop();
    setFitJobQueue(null);
  });
});

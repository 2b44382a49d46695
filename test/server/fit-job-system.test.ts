// The refit service on the PostgreSQL job system (lib/server/fits/job-system.ts, lib/server/jobs):
// the lease that lets several workers share one database, coalescing of refit jobs by pg-boss's
// `short` policy, and workers sharing the projects. Rules under test are stated in
// lib/server/fits/run-fit.ts (ProcessOptions.lease) and lib/server/jobs/boss.ts.
import type PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Db } from '@/lib/server/db';
import { enqueueFitTx } from '@/lib/server/fits/enqueue';
import { inlineEngine } from '@/lib/server/fits/engine';
import { JobSystemFitQueue, startFitJobWorker } from '@/lib/server/fits/job-system';
import { processProject, type FitLease } from '@/lib/server/fits/run-fit';
import { JOB_QUEUES, JOB_SCHEMA, sendRefit, startJobSystem } from '@/lib/server/jobs/boss';
import { announceJob, listenForJobs } from '@/lib/server/jobs/wake';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';
import { createQueueFixture, manualClock, type QueueFixture } from './queue-fixtures';

let t: TestDatabase;
let db: Db;

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
});
afterAll(async () => {
  await t.drop();
});

/** Two clusters along x (hand-made: "a" near −1.5, "b" near +1.5), separable with a wide margin. */
async function project(samples = 60): Promise<QueueFixture> {
  return createQueueFixture(db, {
    classes: ['a', 'b'],
    samples,
    settings: { applyEvery: 1, queueCap: 20, pivotCap: 3, folds: 3 },
    features: (i) => [(i % 2 === 0 ? -1.5 : 1.5) + ((i * 7) % 10) / 20, ((i * 13) % 10) / 10],
    labels: (i) => (i % 2 === 0 ? 'a' : 'b'),
  });
}

async function queueRevision0(f: QueueFixture): Promise<string> {
  const p = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
  const r = await db.revision.findUniqueOrThrow({ where: { projectId_number: { projectId: f.projectId, number: 0 } }, select: { id: true, number: true } });
  return enqueueFitTx(db, p, r);
}

describe('the lease of a running fit (several workers on one database)', () => {
  const lease: FitLease = { workerId: 'worker-b', heartbeatMs: 1000, staleMs: 30_000 };

  it('runs again a fit whose worker stopped answering, and fails the orphan with the reason', async () => {
    const f = await project();
    const orphanId = await queueRevision0(f);
    const clock = manualClock();
    const started = new Date(clock().getTime() - 31_000);
    await db.fit.update({ where: { id: orphanId }, data: { status: 'running', startedAt: started, heartbeatAt: started, workerId: 'worker-a' } });
    const out = await processProject(db, f.projectId, { engine: inlineEngine, lease, clock, followUp: false });
    expect(out?.status).toBe('done');
    expect(out?.fitId).not.toBe(orphanId);
    const orphan = await db.fit.findUniqueOrThrow({ where: { id: orphanId } });
    // Expected text: the message written in requeueOrphanTx (run-fit.ts).
    expect([orphan.status, orphan.error]).toEqual(['failed', `its worker (worker-a) stopped answering for 30 s; run again as fit ${out?.fitId}`]);
    const rerun = await db.fit.findUniqueOrThrow({ where: { id: out?.fitId } });
    expect([rerun.revisionNumber, rerun.workerId, rerun.settings]).toEqual([0, 'worker-b', orphan.settings]);
    expect(await db.standing.count({ where: { fitId: orphanId } })).toBe(0);
    expect(await db.standing.count({ where: { fitId: rerun.id } })).toBe(60);
  });

  it('leaves a running fit alone while its heartbeat is fresh, and always without a lease', async () => {
    const f = await project();
    const id = await queueRevision0(f);
    const clock = manualClock();
    const beat = new Date(clock().getTime() - 29_000);
    await db.fit.update({ where: { id }, data: { status: 'running', startedAt: beat, heartbeatAt: beat, workerId: 'worker-a' } });
    expect(await processProject(db, f.projectId, { engine: inlineEngine, lease, clock })).toBeNull();
    clock.advance(60_000);
    expect(await processProject(db, f.projectId, { engine: inlineEngine, clock })).toBeNull();
    expect((await db.fit.findUniqueOrThrow({ where: { id } })).status).toBe('running');
  });
});

describe.skipIf(TEST_PROVIDER !== 'postgresql')('refit jobs on pg-boss', () => {
  let sender: PgBoss;
  beforeAll(async () => {
    sender = await startJobSystem({ connectionString: t.url, role: 'app', poolSize: 2 });
  });
  afterAll(async () => {
    await sender.stop({ graceful: false, wait: true });
  });

  async function waitingJobs(projectId: string): Promise<number> {
    const rows = await db.$queryRawUnsafe<{ n: bigint }[]>(
      `SELECT count(*) AS n FROM ${JOB_SCHEMA}.job WHERE name = $1 AND singleton_key = $2 AND state = 'created'`,
      JOB_QUEUES.refit,
      projectId,
    );
    return Number(rows[0].n);
  }

  it('coalesces: five requests for one project while no worker runs leave one waiting job', async () => {
    const f = await project();
    const ids = [];
    for (let i = 0; i < 5; i++) ids.push(await sendRefit(sender, { projectId: f.projectId, revisionNumber: i }));
    expect(ids.filter((x) => x !== null)).toHaveLength(1);
    expect(await waitingJobs(f.projectId)).toBe(1);
  });

  it('two workers share the projects: every project ends with one done fit of its newest revision', async () => {
    const projects = [];
    for (let i = 0; i < 4; i++) projects.push(await project(40 + 10 * i));
    const queue = new JobSystemFitQueue(db, sender);
    for (const f of projects) {
      await queueRevision0(f);
      await queue.enqueue({ projectId: f.projectId, revisionNumber: 0 });
    }
    const bosses = [await startJobSystem({ connectionString: t.url, role: 'worker' }), await startJobSystem({ connectionString: t.url, role: 'worker' })];
    const workers = await Promise.all(
      bosses.map((boss, k) =>
        startFitJobWorker({ db, boss, engines: [inlineEngine], lease: { workerId: `w${k}`, heartbeatMs: 500, staleMs: 10_000 }, bootstrap: false, sweepMs: 1000 }),
      ),
    );
    try {
      for (const f of projects) await queue.idle(f.projectId);
    } finally {
      for (const w of workers) await w.stop();
      for (const b of bosses) await b.stop({ graceful: true, wait: true });
    }
    for (const [k, f] of projects.entries()) {
      const fits = await db.fit.findMany({ where: { projectId: f.projectId }, select: { status: true, workerId: true, revisionNumber: true } });
      expect(fits.map((x) => [x.status, x.revisionNumber])).toEqual([['done', 0]]);
      expect(['w0', 'w1']).toContain(fits[0].workerId);
      expect(await db.standing.count({ where: { fit: { projectId: f.projectId } } })).toBe(40 + 10 * k);
    }
  }, 60_000);
});

describe.skipIf(TEST_PROVIDER !== 'postgresql')('announced jobs (lib/server/jobs/wake.ts)', () => {
  it('a listener hears the queue of every job sent', async () => {
    const sender = await startJobSystem({ connectionString: t.url, role: 'app' });
    const heard: string[] = [];
    let resolveHeard: () => void = () => {};
    const twoHeard = new Promise<void>((r) => (resolveHeard = r));
    const listener = listenForJobs(t.url, (queue) => {
      heard.push(queue);
      if (heard.length === 2) resolveHeard();
    });
    try {
      const f = await project();
      await listener.ready;
      await sendRefit(sender, { projectId: f.projectId });
      await announceJob(sender, JOB_QUEUES.import);
      await twoHeard;
      expect(heard).toEqual([JOB_QUEUES.refit, JOB_QUEUES.import]);
    } finally {
      await listener.stop();
      await sender.stop({ graceful: true, wait: true });
    }
  });

  it('a worker that polls only every 60 s takes an announced refit at once', async () => {
    const sender = await startJobSystem({ connectionString: t.url, role: 'app' });
    const boss = await startJobSystem({ connectionString: t.url, role: 'worker' });
    // One announcement wakes the worker for one fetch; a refit job an earlier test left waiting
    // (the coalescing test's) would take that fetch, so the queue starts empty here.
    await db.$executeRawUnsafe(`DELETE FROM ${JOB_SCHEMA}.job WHERE name = $1 AND state = 'created'`, JOB_QUEUES.refit);
    const f = await project();
    await queueRevision0(f);
    const worker = await startFitJobWorker({
      db,
      boss,
      engines: [inlineEngine],
      lease: { workerId: 'woken', heartbeatMs: 500, staleMs: 10_000 },
      bootstrap: false,
      sweepMs: 600_000,
      pollingIntervalSeconds: 60,
      wakeUrl: t.url,
    });
    try {
      // startFitJobWorker returns once its listener is in place. The worker's first poll (at
      // start) may not have found the job: only the announcement can bring the worker to it
      // before the next poll in 60 s (pg-boss skips the wait when notified during a fetch).
      await new JobSystemFitQueue(db, sender).enqueue({ projectId: f.projectId, revisionNumber: 0 });
      await new JobSystemFitQueue(db, sender).idle(f.projectId);
      const fits = await db.fit.findMany({ where: { projectId: f.projectId }, select: { status: true, workerId: true } });
      expect(fits).toEqual([{ status: 'done', workerId: 'woken' }]);
    } finally {
      await worker.stop();
      await boss.stop({ graceful: true, wait: true });
      await sender.stop({ graceful: true, wait: true });
    }
  }, 30_000);
});

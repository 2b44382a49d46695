// Fault test (job-system mode, PostgreSQL): a worker process (`scripts/worker.ts`, the real
// `npm run worker`) is killed with SIGKILL in the middle of a refit. A second worker then finds the
// fit's heartbeat stale, fails the orphan with the reason, runs the fit again and finishes it; the
// killed worker's pg-boss job expires and is retried. Nothing of the killed run remains.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Db } from '@/lib/server/db';
import { enqueueFitTx } from '@/lib/server/fits/enqueue';
import { JOB_QUEUES, JOB_SCHEMA } from '@/lib/server/jobs/boss';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';
import { createQueueFixture } from './queue-fixtures';

const ROOT = fileURLToPath(new URL('../..', import.meta.url));
const SAMPLES = 2500;
const LEASE_SECONDS = 3;

let t: TestDatabase;
let db: Db;
let dataDir: string;
const children: ChildProcess[] = [];

function startWorker(label: string): { child: ChildProcess; output: () => string } {
  const child = spawn(process.execPath, ['--import', 'tsx', join(ROOT, 'scripts', 'worker.ts')], {
    cwd: ROOT,
    detached: true,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: {
      ...process.env,
      NODE_ENV: 'test',
      DATABASE_URL: t.url,
      BORDERLINE_DATA_DIR: dataDir,
      BORDERLINE_JOBS: 'job-system',
      BORDERLINE_FIT_LEASE_SECONDS: String(LEASE_SECONDS),
      BORDERLINE_JOB_EXPIRE_SECONDS: '4',
      BORDERLINE_JOB_MAINTENANCE_SECONDS: '1',
    },
  });
  children.push(child);
  let out = '';
  child.stdout?.on('data', (b: Buffer) => (out += b.toString()));
  child.stderr?.on('data', (b: Buffer) => (out += b.toString()));
  return { child, output: () => `[${label}]\n${out}` };
}

async function until<T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs: number, diagnostics: () => string): Promise<T> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    const v = await probe();
    if (v) return v;
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}\n${diagnostics()}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

beforeAll(async () => {
  if (TEST_PROVIDER !== 'postgresql') return;
  t = await createTestDatabase('postgresql');
  await t.migrate();
  db = t.client();
  dataDir = mkdtempSync(join(tmpdir(), 'borderline-worker-crash-'));
});
afterAll(async () => {
  for (const c of children) {
    try {
      if (c.exitCode === null && c.pid) process.kill(-c.pid, 'SIGKILL');
    } catch {
      // already gone
    }
  }
  if (TEST_PROVIDER !== 'postgresql') return;
  await t.drop();
  rmSync(dataDir, { recursive: true, force: true });
});

describe.skipIf(TEST_PROVIDER !== 'postgresql')('a worker killed mid-refit', () => {
  it('leaves its fit to another worker, which runs it again and finishes it', async () => {
    // Two overlapping rings (radii 1–1.45 and 1.3–1.75: not linearly separable, some samples on the
    // wrong side): an RBF fit with pivots and 5 folds takes a
    // few seconds, long enough to kill the worker in the middle.
    const f = await createQueueFixture(db, {
      classes: ['inner', 'outer'],
      samples: SAMPLES,
      settings: { kernel: 'rbf', C: 10, folds: 5, pivotCap: 60, queueCap: 200, applyEvery: 1 },
      features: (i) => {
        const r = i % 2 === 0 ? 1 + ((i * 7) % 10) / 20 : 1.3 + ((i * 11) % 10) / 20;
        const a = (i * 2.399963) % (2 * Math.PI);
        return [r * Math.cos(a), r * Math.sin(a)];
      },
      labels: (i) => (i % 2 === 0 ? 'inner' : 'outer'),
    });
    const project = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
    const revision = await db.revision.findUniqueOrThrow({ where: { projectId_number: { projectId: f.projectId, number: 0 } } });
    const orphanId = await enqueueFitTx(db, project, revision);

    const a = startWorker('worker A');
    const running = await until(
      'worker A to be in the middle of the fit',
      async () => {
        const fit = await db.fit.findUnique({ where: { id: orphanId }, select: { status: true, progress: true, workerId: true } });
        return fit?.status === 'running' && fit.progress > 0.05 && fit.workerId ? fit : null;
      },
      60_000,
      a.output,
    );
    process.kill(-(a.child.pid as number), 'SIGKILL');
    await new Promise((r) => a.child.once('exit', r));
    expect((await db.fit.findUniqueOrThrow({ where: { id: orphanId } })).status).toBe('running');

    const b = startWorker('worker B');
    const done = await until(
      'worker B to finish the fit again',
      () => db.fit.findFirst({ where: { projectId: f.projectId, revisionNumber: 0, status: 'done', progress: 1 } }),
      120_000,
      () => `${a.output()}\n${b.output()}`,
    );

    const orphan = await db.fit.findUniqueOrThrow({ where: { id: orphanId } });
    // Expected text: the message written by requeueOrphanTx (lib/server/fits/run-fit.ts).
    expect(orphan.status).toBe('failed');
    expect(orphan.error).toBe(`its worker (${running.workerId}) stopped answering for ${LEASE_SECONDS} s; run again as fit ${done.id}`);
    expect(done.workerId).not.toBe(running.workerId);
    expect(done.workerId).toMatch(/:\d+:[0-9a-f]{8}$/);
    expect(await db.standing.count({ where: { fitId: orphanId } })).toBe(0);
    expect(await db.standing.count({ where: { fitId: done.id } })).toBe(SAMPLES);
    const items = await db.queueItem.findMany({ where: { projectId: f.projectId }, select: { fitId: true } });
    expect(items.length).toBeGreaterThan(0);
    expect(new Set(items.map((i) => i.fitId))).toEqual(new Set([done.id]));

    // pg-boss's side: the killed worker's job expired, was retried and completed.
    const jobs = await until(
      'every refit job of the project to be completed',
      async () => {
        const rows = await db.$queryRawUnsafe<{ state: string; retry_count: number }[]>(
          `SELECT state, retry_count FROM ${JOB_SCHEMA}.job WHERE name = $1 AND singleton_key = $2`,
          JOB_QUEUES.refit,
          f.projectId,
        );
        return rows.length > 0 && rows.every((r) => r.state === 'completed') ? rows : null;
      },
      30_000,
      () => `${a.output()}\n${b.output()}`,
    );
    expect(Math.max(...jobs.map((j) => j.retry_count))).toBeGreaterThanOrEqual(1);
    process.kill(-(b.child.pid as number), 'SIGTERM');
    const code = await new Promise((r) => b.child.once('exit', r));
    expect(code).toBe(0);
  }, 240_000);
});

// Killing processes in the middle of a job-system import (lib/server/import/staged.ts, job.ts):
//
// - the app instance, while it stores the upload as chunks: no sample, no revision; the staged
//   batch and its chunks are removed by a worker's sweep after the grace period;
// - the worker, while it writes the samples: no partial sample (the transaction dies with the
//   connection); another worker's sweep re-queues the batch once its heartbeat is stale and the
//   import completes exactly once (one revision, every row of the file, one history row).
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startImportJobWorker, sweepImports } from '@/lib/server/import/job';
import { queueImportJob, stageImport, waitForImport } from '@/lib/server/import/staged';
import { startJobSystem } from '@/lib/server/jobs/boss';
import { snapshot, TEST_PROVIDER } from './db-harness';
import { chunked, newProject, openImportWorld, projectState, type ImportWorld } from './import-helpers';

const ROOT = fileURLToPath(new URL('../..', import.meta.url));
const APP_CHILD = fileURLToPath(new URL('./import-job-app-child.ts', import.meta.url));
const WORKER_CHILD = fileURLToPath(new URL('./import-job-worker-child.ts', import.meta.url));
const ROWS = 60_000;
const FEATURES = 16;

function bigCsv(): string {
  const lines = [`id,label,${Array.from({ length: FEATURES }, (_, j) => `f${j}`).join(',')}`];
  for (let i = 0; i < ROWS; i++) {
    const values = Array.from({ length: FEATURES }, (_, j) => ((i * 31 + j * 7) % 1000) / 100 - 5);
    lines.push(`k${i},${['north', 'south', 'east'][i % 3]},${values.join(',')}`);
  }
  return `${lines.join('\n')}\n`;
}

/** Starts a child under tsx; `onLine` sees each stdout line. */
function child(entry: string, args: string[], onLine: (line: string, proc: ChildProcess) => void): { proc: ChildProcess; exited: Promise<string> } {
  const proc = spawn(process.execPath, ['--import', 'tsx', entry, ...args], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
  let buffered = '';
  let stderr = '';
  proc.stdout?.setEncoding('utf8');
  proc.stdout?.on('data', (text: string) => {
    buffered += text;
    let nl = buffered.indexOf('\n');
    while (nl !== -1) {
      onLine(buffered.slice(0, nl), proc);
      buffered = buffered.slice(nl + 1);
      nl = buffered.indexOf('\n');
    }
  });
  proc.stderr?.setEncoding('utf8');
  proc.stderr?.on('data', (text: string) => {
    stderr += text;
  });
  const exited = new Promise<string>((resolve, reject) => {
    proc.on('error', reject);
    proc.on('exit', () => resolve(stderr));
  });
  return { proc, exited };
}

describe.skipIf(TEST_PROVIDER !== 'postgresql')('killed mid-import on the job system', () => {
  let w: ImportWorld;
  let dir: string;
  let file: string;
  let sender: PgBoss;

  beforeAll(async () => {
    w = await openImportWorld();
    dir = mkdtempSync(join(tmpdir(), 'borderline-job-crash-'));
    file = join(dir, 'big.csv');
    writeFileSync(file, bigCsv());
    sender = await startJobSystem({ connectionString: w.t.url, role: 'app', poolSize: 2 });
  });
  afterAll(async () => {
    await sender.stop({ graceful: false, wait: true });
    await w.close();
    rmSync(dir, { recursive: true, force: true });
  });

  it('app instance SIGKILLed while storing the upload: nothing imported; the sweep removes the staged batch', async () => {
    const projectId = await newProject(w, { featureCount: FEATURES });
    const before = await snapshot(w.t);
    let storedChunks = 0;
    let finished = false;
    const { exited } = child(APP_CHILD, [w.t.url, w.teamId, projectId, w.userId, file, String(256 * 1024)], (line, proc) => {
      const m = /^stored \d+ (\d+)$/.exec(line);
      if (m && storedChunks === 0 && Number(m[1]) >= 3) {
        storedChunks = Number(m[1]);
        proc.kill('SIGKILL');
      }
      if (line.startsWith('finished')) finished = true;
    });
    const stderr = await exited;
    expect(storedChunks, stderr).toBeGreaterThanOrEqual(3);
    expect(finished, 'the upload finished before it was killed').toBe(false);

    const batches = await w.db.importBatch.findMany({ where: { projectId }, select: { id: true, status: true, _count: { select: { chunks: true } } } });
    expect(batches.map((b) => b.status)).toEqual(['staged']);
    expect(batches[0]._count.chunks).toBeGreaterThanOrEqual(3);
    const state = await projectState(w, projectId);
    expect([state.samples.length, state.revisions.length, state.project?.currentRevision]).toEqual([0, 0, 0]);

    // Within the grace period the sweep leaves the upload alone; after it, the batch goes.
    const sweepOptions = { db: w.db, boss: sender, workerId: 'sweeper', lease: { heartbeatMs: 1000, staleMs: 30_000 }, stagedGraceMs: 60_000 };
    expect((await sweepImports(sweepOptions)).removed).toBe(0);
    expect((await sweepImports(sweepOptions, new Date(Date.now() + 61_000))).removed).toBe(1);
    expect(await w.db.importChunk.count()).toBe(0);
    const after = await snapshot(w.t);
    expect(after.data).toEqual(before.data);
  });

  it('worker SIGKILLed while writing: no partial samples; another worker completes the batch exactly once', async () => {
    const projectId = await newProject(w, { featureCount: FEATURES });
    const staged = await stageImport(w.db, w.scope, projectId, { fileName: 'big.csv', mode: 'insert', address: null }, w.userId, chunked(new Uint8Array(readFileSync(file)), 65_536), {
      chunkBytes: 1024 * 1024,
    });
    expect(staged.chunks).toBeGreaterThan(1);
    const before = await projectState(w, projectId);
    await queueImportJob(sender, staged.batchId);

    // Kill the worker once the batch's progress shows at least 2,000 rows written.
    const first = child(WORKER_CHILD, [w.t.url, 'worker-a'], () => {});
    let killedAt: number | null = null;
    for (let i = 0; i < 1200 && killedAt === null; i++) {
      const batch = await w.db.importBatch.findUniqueOrThrow({ where: { id: staged.batchId }, select: { progress: true, outcome: true } });
      expect(batch.outcome, 'the import finished before the worker was killed').toBeNull();
      const p = batch.progress === null ? null : (JSON.parse(batch.progress) as { phase: string; written: number });
      if (p?.phase === 'writing' && p.written >= 2000) {
        killedAt = p.written;
        first.proc.kill('SIGKILL');
      } else await new Promise((r) => setTimeout(r, 50));
    }
    const stderr = await first.exited;
    expect(killedAt, stderr).not.toBeNull();

    expect(await projectState(w, projectId)).toEqual(before);
    const orphan = await w.db.importBatch.findUniqueOrThrow({ where: { id: staged.batchId } });
    expect([orphan.status, orphan.outcome]).toEqual(['running', null]);
    expect(await w.db.importChunk.count({ where: { batchId: staged.batchId } })).toBe(staged.chunks);

    const boss = await startJobSystem({ connectionString: w.t.url, role: 'worker' });
    const log: string[] = [];
    const second = await startImportJobWorker({ db: w.db, boss, workerId: 'worker-b', lease: { heartbeatMs: 200, staleMs: 2000 }, sweepMs: 500, log: (msg) => log.push(msg) });
    try {
      const stored = await waitForImport(w.db, staged.batchId, { pollMs: 100, signal: AbortSignal.timeout(90_000) });
      if (stored?.kind !== 'outcome' || !stored.outcome.ok) throw new Error(JSON.stringify(stored));
      expect(stored.outcome).toMatchObject({ rows: ROWS, added: ROWS, revisionNumber: 0, batchId: staged.batchId });
    } finally {
      await second.stop();
      await boss.stop({ graceful: true, wait: true });
    }
    expect(log).toContain('import re-queued: its worker stopped answering');

    const after = await projectState(w, projectId);
    expect(after.samples.length).toBe(ROWS);
    expect(after.revisions.map((r) => [r.number, r.kind, r.changeCount])).toEqual([[0, 'import', ROWS]]);
    expect(after.fits.map((f) => [f.status, f.revisionNumber])).toEqual([['queued', 0]]);
    const batches = await w.db.importBatch.findMany({ where: { projectId }, select: { id: true, status: true, rowCount: true, revisionNumber: true } });
    expect(batches).toEqual([{ id: staged.batchId, status: 'applied', rowCount: ROWS, revisionNumber: 0 }]);
    expect(await w.db.auditEvent.count({ where: { action: 'import.applied', targetId: projectId } })).toBe(1);
    expect(await w.db.importChunk.count()).toBe(0);
  });
});

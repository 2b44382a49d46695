/**
 * Worker scaling benchmark (issue: "two workers finish a batch of refits in clearly less time than
 * one"), run by `npm run bench:workers`. PostgreSQL only (the job system).
 *
 * A temporary database at BORDERLINE_TEST_PG_URL (default postgresql://postgres@127.0.0.1:5432/test
 * as the admin connection) gets BENCH_PROJECTS projects (default 6) of BENCH_ROWS × BENCH_COLS
 * (default 2,000 × 32) samples: 3 classes around random centres, 5 % labels flipped, RBF kernel,
 * C = 1, 5 folds, 20 pivots per boundary — one full refit takes several seconds. For each worker
 * count in BENCH_WORKERS (default "1,2"), every project gets a queued fit and a refit job, that many
 * `npm run worker` processes (scripts/worker.ts, the real thing) are started, and the time until
 * every fit is done is taken (from the first job sent to the last fit done; worker start-up is
 * excluded: the workers are started and ready before the jobs are sent). Between rounds the fits
 * are deleted. Output: a table and bench/out/workers.json. Deterministic data (pure-rand).
 */
import type { ChildProcess } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, tmpdir } from 'node:os';
import { join } from 'node:path';
import { xoroshiro128plus } from 'pure-rand';
import { ROOT, scratchPgDatabase, startWorker, uniform } from './support';

const PROJECTS = Number(process.env.BENCH_PROJECTS ?? 6);
const ROWS = Number(process.env.BENCH_ROWS ?? 2000);
const COLS = Number(process.env.BENCH_COLS ?? 32);
const WORKER_COUNTS = (process.env.BENCH_WORKERS ?? '1,2').split(',').map(Number);
const CLASSES = ['refund', 'shipping', 'account'];

async function main(): Promise<void> {
  const scratch = await scratchPgDatabase(`borderline_bench_workers_${process.pid}`);
  const url = scratch.url;
  const dataDir = mkdtempSync(join(tmpdir(), 'borderline-bench-workers-'));
  const results: { workers: number; seconds: number; perFit: number }[] = [];
  try {
    const { parseDatabaseUrl } = await import('../lib/server/env');
    const { applyMigrations } = await import('../lib/server/migrate/runner');
    const { createDb } = await import('../lib/server/db');
    const { encodeFeatures } = await import('../lib/server/features');
    const { DEFAULT_PROJECT_SETTINGS } = await import('../lib/domain-queue');
    const { enqueueCurrentRevisionTx } = await import('../lib/server/fits/enqueue');
    const { startJobSystem, sendRefit } = await import('../lib/server/jobs/boss');
    const config = parseDatabaseUrl(url, ROOT);
    await applyMigrations(config, { root: ROOT });
    const db = createDb(config, { log: ['warn', 'error'] });
    console.log(`Worker benchmark: ${PROJECTS} projects of ${ROWS.toLocaleString('en-US')} × ${COLS} (RBF), ${cpus().length} cores`);

    const team = await db.team.create({ data: { name: 'Bench team' } });
    const settings = { ...DEFAULT_PROJECT_SETTINGS, kernel: 'rbf' as const, C: 1, folds: 5, pivotCap: 20, queueCap: 500 };
    const projectIds: string[] = [];
    const rng = xoroshiro128plus(20261202);
    for (let p = 0; p < PROJECTS; p++) {
      const project = await db.project.create({ data: { teamId: team.id, name: `Bench ${p}`, featureCount: COLS, settings: JSON.stringify(settings) } });
      await db.projectClass.createMany({ data: CLASSES.map((n, position) => ({ projectId: project.id, name: n, position })) });
      await db.revision.create({ data: { projectId: project.id, number: 0, kind: 'import' } });
      const centres = CLASSES.map(() => Array.from({ length: COLS }, () => uniform(rng) * 2 - 1));
      const rows = Array.from({ length: ROWS }, (_, i) => {
        const k = i % CLASSES.length;
        const x = centres[k].map((c) => c + (uniform(rng) + uniform(rng) + uniform(rng) - 1.5) * 0.9);
        const label = uniform(rng) < 0.05 ? CLASSES[(k + 1) % CLASSES.length] : CLASSES[k];
        return { projectId: project.id, externalId: `r${i}`, features: encodeFeatures(x), originalLabel: label, currentLabel: label };
      });
      for (let i = 0; i < rows.length; i += 2000) await db.sample.createMany({ data: rows.slice(i, i + 2000) });
      projectIds.push(project.id);
    }
    const sender = await startJobSystem({ connectionString: url, role: 'app', poolSize: 2 });

    for (const count of WORKER_COUNTS) {
      await db.queueItem.deleteMany({});
      await db.fit.deleteMany({});
      const workers = await Promise.all(
        Array.from({ length: count }, () =>
          startWorker(url, {
            detached: true,
            env: { BORDERLINE_DATA_DIR: dataDir, NODE_ENV: 'production', NEXTAUTH_SECRET: 'bench-only-secret-0123456789-abcdefghijklmnop' },
            onLog: (entry) => {
              if (process.env.BENCH_VERBOSE && entry.msg?.startsWith('fit ')) process.stdout.write(`  ${entry.msg}\n`);
            },
          }),
        ),
      );
      try {
        const started = performance.now();
        for (const id of projectIds) {
          await db.$transaction((tx) => enqueueCurrentRevisionTx(tx, id));
          await sendRefit(sender, { projectId: id, revisionNumber: 0 });
        }
        for (;;) {
          const done = await db.fit.count({ where: { status: 'done', progress: 1 } });
          const failed = await db.fit.findFirst({ where: { status: 'failed' }, select: { error: true } });
          if (failed) throw new Error(`a fit failed: ${failed.error}`);
          if (done >= PROJECTS) break;
          await new Promise((r) => setTimeout(r, 100));
        }
        const seconds = (performance.now() - started) / 1000;
        results.push({ workers: count, seconds, perFit: seconds / PROJECTS });
        const byWorker = await db.fit.groupBy({ by: ['workerId'], where: { status: 'done' }, _count: true });
        console.log(`${count} worker(s): ${seconds.toFixed(1)} s for ${PROJECTS} refits (${byWorker.map((w) => w._count).join(' + ')} fits per worker)`);
      } finally {
        for (const w of workers) process.kill(-(w.pid as number), 'SIGTERM');
        await Promise.all(workers.map((w) => new Promise((r) => (w.exitCode === null ? w.once('exit', r) : r(null)))));
      }
    }
    await sender.stop({ graceful: false, wait: true });
    await db.$disconnect();
    const base = results.find((r) => r.workers === 1);
    for (const r of results) if (base) console.log(`${r.workers} worker(s): speed-up ${(base.seconds / r.seconds).toFixed(2)}×`);
    mkdirSync(join(ROOT, 'bench', 'out'), { recursive: true });
    writeFileSync(join(ROOT, 'bench', 'out', 'workers.json'), JSON.stringify({ projects: PROJECTS, rows: ROWS, cols: COLS, cores: cpus().length, results }, null, 2));
  } finally {
    await scratch.drop();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

await main();

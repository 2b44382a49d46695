/**
 * Benchmark: the 100,000 × 256 CSV of bench/import.ts through the PostgreSQL job system — the
 * request's half (stream the file into ImportChunk rows) and a worker's half (pg-boss job, claim,
 * the import pipeline reading the chunks, outcome) — in one process, into a throwaway database.
 *
 *   npx tsx bench/import-job.ts                 # 100,000 × 256
 *   npx tsx bench/import-job.ts --rows 20000
 *
 * Prints the time of each stage and the peak resident set. PostgreSQL: BENCH_PG_URL (default
 * postgresql://postgres@127.0.0.1:5432/postgres). Compare with `npx tsx bench/import.ts --only
 * postgres` (the same file imported in-process).
 */
import { createReadStream, mkdtempSync, rmSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import pg from 'pg';
import { mintTeamScope } from '../lib/server/authz/scope';
import { createDb } from '../lib/server/db';
import { parseDatabaseUrl } from '../lib/server/env';
import { startImportJobWorker } from '../lib/server/import/job';
import { queueImportJob, stageImport, waitForImport } from '../lib/server/import/staged';
import { startJobSystem } from '../lib/server/jobs/boss';
import { applyMigrations } from '../lib/server/migrate/runner';
import { generateCsv } from './import-data';

const ROOT = fileURLToPath(new URL('..', import.meta.url));

function arg(name: string): string | undefined {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 ? process.argv[i + 1] : undefined;
}

const gb = (n: number) => `${(n / 1024 ** 3).toFixed(2)} GB`;

async function main(): Promise<void> {
  const rows = Number(arg('rows') ?? 100_000);
  const cols = Number(arg('cols') ?? 256);
  const dir = mkdtempSync(join(tmpdir(), 'borderline-bench-import-job-'));
  const file = join(dir, 'bench.csv');
  const adminUrl = process.env.BENCH_PG_URL ?? 'postgresql://postgres@127.0.0.1:5432/postgres';
  const pgName = `borderline_bench_job_${process.pid}`;
  const admin = new pg.Client({ connectionString: adminUrl });
  await admin.connect();
  await admin.query(`CREATE DATABASE "${pgName}"`);
  await admin.end();
  const u = new URL(adminUrl);
  u.pathname = `/${pgName}`;
  const url = u.toString();
  let peak = process.memoryUsage().rss;
  const poll = setInterval(() => {
    peak = Math.max(peak, process.memoryUsage().rss);
  }, 50);
  try {
    const size = await generateCsv(file, rows, cols);
    console.log(`Generated ${rows.toLocaleString('en')} × ${cols} CSV (${(size / 1024 ** 2).toFixed(0)} MB)`);
    const config = parseDatabaseUrl(url, ROOT);
    await applyMigrations(config, { root: ROOT });
    const client = createDb(config);
    const sender = await startJobSystem({ connectionString: url, role: 'app', poolSize: 2 });
    const workerBoss = await startJobSystem({ connectionString: url, role: 'worker' });
    const worker = await startImportJobWorker({ db: client, boss: workerBoss, workerId: 'bench', lease: { heartbeatMs: 5000, staleMs: 30_000 } });
    try {
      const team = await client.team.create({ data: { name: 'Bench team' } });
      const user = await client.user.create({ data: { email: 'bench@example.org', name: 'Bench', passwordHash: 'x' } });
      await client.membership.create({ data: { teamId: team.id, userId: user.id, role: 'lead' } });
      const project = await client.project.create({ data: { teamId: team.id, name: 'Bench', featureCount: cols, settings: '{}' } });

      const t0 = performance.now();
      const staged = await stageImport(
        client,
        mintTeamScope(team.id),
        project.id,
        { fileName: 'bench.csv', mode: 'insert', address: null },
        user.id,
        createReadStream(file, { highWaterMark: 1 << 20 }),
      );
      const t1 = performance.now();
      await queueImportJob(sender, staged.batchId);
      const marks: Record<string, number> = {};
      const stored = await waitForImport(client, staged.batchId, {
        onProgress: (p) => {
          marks[p.phase] ??= performance.now();
        },
      });
      const t2 = performance.now();
      const count = await client.sample.count({ where: { projectId: project.id } });
      const ok = stored?.kind === 'outcome' && stored.outcome.ok && count === rows;
      const s = (a: number, b: number) => `${((b - a) / 1000).toFixed(1)} s`;
      console.log(`stage (file → ${staged.chunks} chunks, ${(staged.bytes / 1024 ** 2).toFixed(0)} MB): ${s(t0, t1)}`);
      console.log(`queue → worker's first progress: ${marks.reading ? s(t1, marks.reading) : 'n/a'}`);
      console.log(`worker reading + checking: ${marks.reading && marks.writing ? s(marks.reading, marks.writing) : 'n/a'}`);
      console.log(`worker writing (one transaction): ${marks.writing ? s(marks.writing, t2) : 'n/a'}`);
      console.log(`total (request start → outcome): ${s(t0, t2)}   samples: ${count}   ${ok ? 'ok' : `FAILED ${JSON.stringify(stored).slice(0, 300)}`}`);
      console.log(`peak resident set (app + worker in one process): ${gb(peak)}`);
      console.log(`chunks left: ${await client.importChunk.count()}`);
    } finally {
      await worker.stop();
      await workerBoss.stop({ graceful: false, wait: true });
      await sender.stop({ graceful: false, wait: true });
      await client.$disconnect();
    }
  } finally {
    clearInterval(poll);
    rmSync(dir, { recursive: true, force: true });
    const a = new pg.Client({ connectionString: adminUrl });
    await a.connect();
    await a.query(`DROP DATABASE IF EXISTS "${pgName}" WITH (FORCE)`);
    await a.end();
    console.log(`Machine: ${cpus().length} cores, load average ${loadavg().map((l) => l.toFixed(1)).join(' / ')} (1 / 5 / 15 min) at the end.`);
  }
}

await main();

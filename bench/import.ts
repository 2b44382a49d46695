/**
 * Benchmark: import of a 100,000 × 256 CSV (DESIGN.md §5) into a fresh SQLite database and a
 * fresh PostgreSQL database. Targets: under 60 s and peak memory (resident set) under 1.5 GB each.
 *
 *   npm run bench:import                      # both databases
 *   npx tsx bench/import.ts --rows 20000      # smaller file
 *   npx tsx bench/import.ts --only sqlite     # one database
 *
 * The CSV is generated deterministically (seeded xoroshiro128+) into a temporary file: columns
 * id, label (4 classes), f0…f255, values written as the shortest decimals that read back to
 * the same float32 (what our export writes). Each database is measured in its own child
 * process, so the peak resident set (VmHWM from /proc/self/status, and the polled maximum of
 * process.memoryUsage().rss) belongs to that import alone. PostgreSQL: BENCH_PG_URL (default
 * postgresql://postgres@127.0.0.1:5432/postgres); a throwaway database is created and dropped.
 */
import { spawnSync } from 'node:child_process';
import { createReadStream, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import pg from 'pg';
import { mintTeamScope } from '../lib/server/authz/scope';
import { createDb } from '../lib/server/db';
import { parseDatabaseUrl } from '../lib/server/env';
import { importSamples } from '../lib/server/import';
import { applyMigrations } from '../lib/server/migrate/runner';
import { generateCsv } from './import-data';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const TARGET_SECONDS = 60;
const TARGET_PEAK_BYTES = 1.5 * 1024 ** 3;

function arg(name: string): string | undefined {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 ? process.argv[i + 1] : undefined;
}

function vmHwmBytes(): number | null {
  try {
    const m = /VmHWM:\s+(\d+)\s+kB/.exec(readFileSync('/proc/self/status', 'utf8'));
    return m ? Number(m[1]) * 1024 : null;
  } catch {
    return null;
  }
}

type ChildResult = {
  provider: string;
  ok: boolean;
  rows: number;
  seconds: number;
  readSeconds: number;
  writeSeconds: number;
  peakRssBytes: number;
  /** Peak resident set up to the end of reading and checking (before the database writes). */
  readPeakRssBytes: number;
  vmHwmBytes: number | null;
  error?: string;
};

/** Child mode: imports `file` into a fresh database of `provider`, prints one JSON line. */
async function child(provider: 'sqlite' | 'postgresql', file: string): Promise<void> {
  let peak = process.memoryUsage().rss;
  const poll = setInterval(() => {
    peak = Math.max(peak, process.memoryUsage().rss);
  }, 50);
  const work = mkdtempSync(join(tmpdir(), 'borderline-bench-db-'));
  const adminUrl = process.env.BENCH_PG_URL ?? 'postgresql://postgres@127.0.0.1:5432/postgres';
  const pgName = `borderline_bench_${process.pid}`;
  let url: string;
  if (provider === 'sqlite') {
    url = `file:${join(work, 'bench.db')}`;
  } else {
    const admin = new pg.Client({ connectionString: adminUrl });
    await admin.connect();
    await admin.query(`DROP DATABASE IF EXISTS "${pgName}"`);
    await admin.query(`CREATE DATABASE "${pgName}"`);
    await admin.end();
    const u = new URL(adminUrl);
    u.pathname = `/${pgName}`;
    url = u.toString();
  }
  const config = parseDatabaseUrl(url, ROOT);
  await applyMigrations(config, { root: ROOT });
  const client = createDb(config);
  try {
    const team = await client.team.create({ data: { name: 'Bench team' } });
    const user = await client.user.create({ data: { email: 'bench@example.org', name: 'Bench', passwordHash: 'x' } });
    await client.membership.create({ data: { teamId: team.id, userId: user.id, role: 'lead' } });
    const project = await client.project.create({ data: { teamId: team.id, name: 'Bench', featureCount: 256, settings: '{}' } });
    const started = performance.now();
    let writingAt = started;
    let readPeak = 0;
    const outcome = await importSamples(
      mintTeamScope(team.id),
      project.id,
      { source: createReadStream(file, { highWaterMark: 1 << 20 }), fileName: 'bench.csv', mode: 'insert', userId: user.id },
      {
        client,
        onProgress: (p) => {
          if (p.phase === 'writing' && writingAt === started) {
            writingAt = performance.now();
            readPeak = Math.max(peak, process.memoryUsage().rss);
          }
        },
      },
    );
    const ended = performance.now();
    clearInterval(poll);
    peak = Math.max(peak, process.memoryUsage().rss);
    const count = await client.sample.count({ where: { projectId: project.id } });
    const result: ChildResult = {
      provider,
      ok: outcome.ok && count === outcome.rows,
      rows: count,
      seconds: (ended - started) / 1000,
      readSeconds: (writingAt - started) / 1000,
      writeSeconds: (ended - writingAt) / 1000,
      peakRssBytes: peak,
      readPeakRssBytes: readPeak,
      vmHwmBytes: vmHwmBytes(),
      error: outcome.ok ? undefined : outcome.problems[0]?.message,
    };
    process.stdout.write(`BENCH_RESULT ${JSON.stringify(result)}\n`);
  } finally {
    clearInterval(poll);
    await client.$disconnect();
    rmSync(work, { recursive: true, force: true });
    if (provider === 'postgresql') {
      const admin = new pg.Client({ connectionString: adminUrl });
      await admin.connect();
      await admin.query(`DROP DATABASE IF EXISTS "${pgName}" WITH (FORCE)`);
      await admin.end();
    }
  }
}

const gb = (n: number) => `${(n / 1024 ** 3).toFixed(2)} GB`;

async function main(): Promise<void> {
  const provider = arg('child');
  if (provider === 'sqlite' || provider === 'postgresql') {
    await child(provider, arg('file') ?? '');
    return;
  }
  const rows = Number(arg('rows') ?? 100_000);
  const cols = Number(arg('cols') ?? 256);
  const only = arg('only');
  const dir = mkdtempSync(join(tmpdir(), 'borderline-bench-import-'));
  const file = join(dir, 'bench.csv');
  try {
    const t0 = performance.now();
    const size = await generateCsv(file, rows, cols);
    console.log(`Generated ${rows.toLocaleString('en')} × ${cols} CSV (${(size / 1024 ** 2).toFixed(0)} MB) in ${((performance.now() - t0) / 1000).toFixed(1)} s`);
    const providers = (['sqlite', 'postgresql'] as const).filter((p) => only === undefined || only === p || (only === 'postgres' && p === 'postgresql'));
    const results: ChildResult[] = [];
    for (const p of providers) {
      const run = spawnSync(process.execPath, [...process.execArgv, fileURLToPath(import.meta.url), '--child', p, '--file', file], {
        cwd: ROOT,
        encoding: 'utf8',
        maxBuffer: 16 * 1024 * 1024,
        stdio: ['ignore', 'pipe', 'inherit'],
      });
      const line = run.stdout.split('\n').find((l) => l.startsWith('BENCH_RESULT '));
      if (!line) {
        console.error(`${p}: the benchmark child failed (exit ${run.status}).\n${run.stdout}`);
        results.push({ provider: p, ok: false, rows: 0, seconds: NaN, readSeconds: NaN, writeSeconds: NaN, peakRssBytes: NaN, readPeakRssBytes: NaN, vmHwmBytes: null });
        continue;
      }
      results.push(JSON.parse(line.slice('BENCH_RESULT '.length)) as ChildResult);
    }
    console.log('');
    console.log('database    rows      total    read+check  write    peak RSS (VmHWM)  target');
    let allPass = true;
    for (const r of results) {
      const peak = Math.max(r.peakRssBytes, r.vmHwmBytes ?? 0);
      const pass = r.ok && r.seconds < TARGET_SECONDS && peak < TARGET_PEAK_BYTES;
      allPass &&= pass;
      console.log(
        `${r.provider.padEnd(11)} ${String(r.rows).padEnd(9)} ${r.seconds.toFixed(1).padStart(6)} s ${r.readSeconds.toFixed(1).padStart(8)} s ${r.writeSeconds.toFixed(1).padStart(7)} s  ${gb(peak).padStart(8)}          ${pass ? 'pass' : 'FAIL'}${r.error ? ` (${r.error})` : ''}`,
      );
    }
    console.log(`\nTargets: under ${TARGET_SECONDS} s and under ${gb(TARGET_PEAK_BYTES)} peak memory per database.`);
    console.log(`Machine: ${cpus().length} cores, load average ${loadavg().map((l) => l.toFixed(1)).join(' / ')} (1 / 5 / 15 min) at the end of the run.`);
    if (!allPass) process.exitCode = 1;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

await main();

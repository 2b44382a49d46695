/**
 * Pieces shared by the benchmarks that run the job system (bench/queue.ts, bench/workers.ts):
 * a scratch PostgreSQL database, the real `npm run worker` process, uniform draws.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import pg from 'pg';
import { unsafeUniformIntDistribution, type RandomGenerator } from 'pure-rand';

export const ROOT = fileURLToPath(new URL('..', import.meta.url));
export const PG_ADMIN = process.env.BORDERLINE_TEST_PG_URL || 'postgresql://postgres@127.0.0.1:5432/test';

/** Uniform in [0, 1) with 2^30 steps. */
export function uniform(rng: RandomGenerator): number {
  return unsafeUniformIntDistribution(0, 2 ** 30 - 1, rng) / 2 ** 30;
}

async function admin(sql: string): Promise<void> {
  const c = new pg.Client({ connectionString: PG_ADMIN });
  await c.connect();
  try {
    await c.query(sql);
  } finally {
    await c.end();
  }
}

/** A fresh, empty PostgreSQL database next to PG_ADMIN's; `drop` removes it. */
export async function scratchPgDatabase(name: string): Promise<{ url: string; drop: () => Promise<void> }> {
  await admin(`DROP DATABASE IF EXISTS "${name}" WITH (FORCE)`);
  await admin(`CREATE DATABASE "${name}"`);
  const u = new URL(PG_ADMIN);
  u.pathname = `/${name}`;
  return { url: u.toString(), drop: () => admin(`DROP DATABASE IF EXISTS "${name}" WITH (FORCE)`) };
}

/**
 * Starts one `npm run worker` process (scripts/worker.ts) on `url` and resolves once it takes
 * jobs. `onLog` sees each of its JSON log lines (stdout).
 */
export function startWorker(url: string, options: { env?: Record<string, string>; detached?: boolean; onLog?: (entry: { msg?: string }, line: string) => void } = {}): Promise<ChildProcess> {
  // BENCH_CPU_PROF=<dir>: V8 CPU profiles of the worker's threads too (written when it exits).
  const profile = process.env.BENCH_CPU_PROF ? ['--cpu-prof', `--cpu-prof-dir=${process.env.BENCH_CPU_PROF}`] : [];
  const child = spawn(process.execPath, [...profile, '--import', 'tsx', join(ROOT, 'scripts', 'worker.ts')], {
    cwd: ROOT,
    detached: options.detached ?? false,
    stdio: ['ignore', 'pipe', 'inherit'],
    env: { ...process.env, ...options.env, DATABASE_URL: url, BORDERLINE_JOBS: 'job-system' },
  });
  return new Promise((resolve, reject) => {
    let out = '';
    child.stdout?.on('data', (b: Buffer) => {
      const text = b.toString();
      out += text;
      if (options.onLog) {
        for (const line of text.split('\n')) if (line.startsWith('{')) options.onLog(JSON.parse(line) as { msg?: string }, line);
      }
      if (out.includes('"msg":"worker started"')) resolve(child);
      if (out.length > 100_000) out = out.slice(-1000);
    });
    child.once('exit', (code) => reject(new Error(`a worker exited (${code}): ${out.slice(-500)}`)));
  });
}

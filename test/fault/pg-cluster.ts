// A private, throwaway PostgreSQL cluster for fault tests: its own data folder, port and socket,
// so a test can stop and start it without touching the shared server on 5432 that other tests
// use at the same time.
//
//   const cluster = findPgBinaries() && await startPrivateCluster();
//   cluster.url          // postgresql://postgres@127.0.0.1:<port>/postgres
//   cluster.stop()       // pg_ctl stop -m fast (clients see their connections terminated)
//   cluster.start()      // pg_ctl start -w (same data, same port)
//   cluster.destroy()    // stop if running, delete the folder
//
// PostgreSQL refuses to run as root, so when the tests run as root every command runs as the
// `postgres` user (runuser), and the data folder is handed to that user first.

import { execFileSync } from 'node:child_process';
import { chownSync, existsSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export type PgBinaries = { initdb: string; pgCtl: string };

/** initdb and pg_ctl of the newest PostgreSQL under /usr/lib/postgresql, or null. */
export function findPgBinaries(root = '/usr/lib/postgresql'): PgBinaries | null {
  if (!existsSync(root)) return null;
  const versions = readdirSync(root)
    .filter((v) => /^\d+$/.test(v))
    .sort((a, b) => Number(b) - Number(a));
  for (const v of versions) {
    const bin = join(root, v, 'bin');
    if (existsSync(join(bin, 'initdb')) && existsSync(join(bin, 'pg_ctl'))) return { initdb: join(bin, 'initdb'), pgCtl: join(bin, 'pg_ctl') };
  }
  return null;
}

async function freePort(): Promise<number> {
  return new Promise((resolvePort, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      const port = typeof address === 'object' && address !== null ? address.port : 0;
      server.close(() => resolvePort(port));
    });
  });
}

export type PrivateCluster = {
  dir: string;
  port: number;
  url: string;
  /** URL of another database on this cluster. */
  urlOf(database: string): string;
  start(): void;
  stop(): void;
  destroy(): void;
};

const asRoot = typeof process.getuid === 'function' && process.getuid() === 0;

function runPg(command: string, args: string[]): string {
  const [file, argv] = asRoot ? ['runuser', ['-u', 'postgres', '--', command, ...args]] : [command, args];
  return execFileSync(file, argv, { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], timeout: 60_000 });
}

/** initdb + start on a free port (trust authentication, TCP on 127.0.0.1 only). */
export async function startPrivateCluster(bins: PgBinaries): Promise<PrivateCluster> {
  const dir = mkdtempSync(join(tmpdir(), 'borderline-pg-'));
  if (asRoot) {
    const uid = Number(execFileSync('id', ['-u', 'postgres'], { encoding: 'utf8' }).trim());
    const gid = Number(execFileSync('id', ['-g', 'postgres'], { encoding: 'utf8' }).trim());
    chownSync(dir, uid, gid);
  }
  const data = join(dir, 'data');
  const port = await freePort();
  let running = false;
  const cluster: PrivateCluster = {
    dir,
    port,
    url: `postgresql://postgres@127.0.0.1:${port}/postgres`,
    urlOf: (database) => `postgresql://postgres@127.0.0.1:${port}/${database}`,
    start() {
      // fsync off: a throwaway cluster; -k: the socket in our own folder, not /var/run/postgresql.
      runPg(bins.pgCtl, ['-D', data, '-o', `-p ${port} -k ${dir} -c listen_addresses=127.0.0.1 -c fsync=off`, '-l', join(dir, 'log'), 'start', '-w', '-t', '60']);
      running = true;
    },
    stop() {
      runPg(bins.pgCtl, ['-D', data, 'stop', '-m', 'fast', '-w', '-t', '60']);
      running = false;
    },
    destroy() {
      // Whatever state a failed test left: if a server holds the folder, stop it first.
      if (running || existsSync(join(data, 'postmaster.pid'))) {
        try {
          runPg(bins.pgCtl, ['-D', data, 'stop', '-m', 'immediate', '-w', '-t', '60']);
        } catch {
          // not running after all
        }
        running = false;
      }
      rmSync(dir, { recursive: true, force: true });
    },
  };
  try {
    runPg(bins.initdb, ['-D', data, '-A', 'trust', '-U', 'postgres', '--no-sync']);
    cluster.start();
  } catch (error) {
    cluster.destroy();
    throw error;
  }
  return cluster;
}

// Start-up failures end in ONE line naming the cause: malformed DATABASE_URL, unreachable or
// missing PostgreSQL, unusable SQLite path; and the checked environment (env.ts) names the
// variable at fault. The expected strings are the product's own wording (the contract), while
// the causes are produced for real (closed port, file in the way, garbage file).

import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigError, env, parseDatabaseUrl, parseEnv, resetEnvCache } from '@/lib/server/env';
import { prepareDatabase, StartupError } from '@/lib/server/startup';
import { TEST_PG_URL, TEST_PROVIDER } from './db-harness';

const EXPECTED_FORMS =
  'expected file:<path> (embedded SQLite) or postgresql://user@host:5432/database (PostgreSQL)';

async function failure(url: string): Promise<string> {
  const error = await prepareDatabase({ env: { DATABASE_URL: url } }).catch((e: unknown) => e);
  if (!(error instanceof StartupError)) throw new Error(`expected a StartupError for ${url}, got ${String(error)}`);
  expect(error.message).not.toContain('\n');
  return error.message;
}

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'borderline-startup-'));
});
afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('DATABASE_URL parsing', () => {
  it('reads SQLite file URLs, relative to the given root', () => {
    expect(parseDatabaseUrl('file:./data/x.db', '/srv/app')).toEqual({ provider: 'sqlite', url: 'file:./data/x.db', file: '/srv/app/data/x.db' });
    expect(parseDatabaseUrl('file:///var/lib/b.db', '/srv/app')).toMatchObject({ file: '/var/lib/b.db' });
    expect(parseDatabaseUrl('file:/var/lib/b.db?mode=rwc', '/srv/app')).toMatchObject({ file: '/var/lib/b.db' });
  });

  it('reads PostgreSQL URLs in both spellings', () => {
    expect(parseDatabaseUrl('postgresql://ana:pw@db.internal:6543/borderline')).toMatchObject({
      provider: 'postgresql',
      host: 'db.internal',
      port: 6543,
      database: 'borderline',
      user: 'ana',
    });
    expect(parseDatabaseUrl('postgres://db.internal/b')).toMatchObject({ provider: 'postgresql', port: 5432, database: 'b' });
  });
});

describe('malformed DATABASE_URL', () => {
  it('names the variable and the accepted forms, without echoing a password', async () => {
    const message = await failure('mysql://root:hunter2@db/app');
    expect(message).toBe('Invalid DATABASE_URL: must start with "file:", "postgresql://" or "postgres://"; got a "mysql:" URL.');
    expect(message).not.toContain('hunter2');
  });

  it('rejects a PostgreSQL URL that does not parse, masking the password', async () => {
    expect(await failure('postgresql://ana:hunter2@db:notaport/app')).toBe(
      `Invalid DATABASE_URL: is not a valid URL ("postgresql://ana:***@db:notaport/app"); ${EXPECTED_FORMS}.`,
    );
  });

  it('rejects a PostgreSQL URL without a database, and an empty file URL', async () => {
    expect(await failure('postgresql://db.internal')).toBe(
      `Invalid DATABASE_URL: names no database ("postgresql://db.internal"); ${EXPECTED_FORMS}.`,
    );
    expect(await failure('file:')).toBe(`Invalid DATABASE_URL: names no file; ${EXPECTED_FORMS}.`);
    expect(await failure('file::memory:')).toBe('Invalid DATABASE_URL: may not be an in-memory SQLite database; give a file path.');
  });

  it('the CLI prints one line (no stack trace) and exits with status 1', async () => {
    const run = await new Promise<{ code: number | null; stderr: string; stdout: string }>((resolve, reject) => {
      const child = spawn(process.execPath, ['--import', 'tsx', 'scripts/db-migrate.ts'], {
        env: { ...process.env, DATABASE_URL: 'mysql://root:hunter2@db/app', BORDERLINE_LOG_LEVEL: 'info' },
        stdio: ['ignore', 'pipe', 'pipe'],
      });
      let stdout = '';
      let stderr = '';
      child.stdout.on('data', (d) => (stdout += d));
      child.stderr.on('data', (d) => (stderr += d));
      child.on('error', reject);
      child.on('close', (code) => resolve({ code, stderr, stdout }));
    });
    expect(run.code).toBe(1);
    expect(run.stdout).toBe('');
    expect(run.stderr).toBe(
      'db:migrate: Invalid DATABASE_URL: must start with "file:", "postgresql://" or "postgres://"; got a "mysql:" URL.\n',
    );
  });
});

describe('unreachable or missing database', () => {
  it('PostgreSQL on a closed port (1): connection refused', async () => {
    expect(await failure('postgresql://postgres@127.0.0.1:1/borderline')).toBe(
      'Cannot reach PostgreSQL at 127.0.0.1:1 (connection refused); check DATABASE_URL and that the server is running.',
    );
  });

  it.runIf(TEST_PROVIDER === 'postgresql')('PostgreSQL without the named database', async () => {
    const u = new URL(TEST_PG_URL);
    u.pathname = '/borderline_no_such_database';
    const port = u.port === '' ? 5432 : Number(u.port);
    expect(await failure(u.toString())).toBe(
      `PostgreSQL at ${u.hostname}:${port} has no database "borderline_no_such_database"; create it (createdb borderline_no_such_database) or fix DATABASE_URL.`,
    );
  });

  it('SQLite path below a regular file: the folder cannot be created', async () => {
    const blocker = join(dir, 'not-a-folder');
    writeFileSync(blocker, 'x');
    expect(await failure(`file:${join(blocker, 'sub', 'b.db')}`)).toBe(
      `Cannot create the folder ${join(blocker, 'sub')} for the SQLite database (a part of the path is a file, not a folder); check DATABASE_URL.`,
    );
  });

  it('SQLite path that is a folder', async () => {
    expect(await failure(`file:${dir}`)).toBe(
      `Cannot use the SQLite database ${dir} (the path is a folder, not a file); check DATABASE_URL.`,
    );
  });

  it('SQLite file that is not a database is reported and left untouched', async () => {
    const file = join(dir, 'garbage.db');
    writeFileSync(file, 'this is not a database file, just text that is long enough to have a header\n');
    expect(await failure(`file:${file}`)).toBe(
      `Cannot use the SQLite database ${file} (the file is not a SQLite database); check DATABASE_URL.`,
    );
    expect(readFileSync(file, 'utf8')).toMatch(/^this is not a database/);
  });

  it('a missing SQLite file is created and migrated (the embedded default needs no setup)', async () => {
    const file = join(dir, 'new', 'fresh.db');
    const result = await prepareDatabase({ env: { DATABASE_URL: `file:${file}` } });
    expect(result.provider).toBe('sqlite');
    expect(result.applied[0]).toBe('0001_init');
    expect(statSync(file).size).toBeGreaterThan(0);
  });
});

describe('checked environment (env.ts)', () => {
  const root = () => mkdtempSync(join(dir, 'root-'));

  it('requires NEXTAUTH_SECRET in production, naming the variable', () => {
    const error = (() => {
      try {
        parseEnv({ NODE_ENV: 'production' }, root());
      } catch (e) {
        return e;
      }
      return null;
    })();
    expect(error).toBeInstanceOf(ConfigError);
    expect((error as ConfigError).variable).toBe('NEXTAUTH_SECRET');
    expect((error as ConfigError).message).toBe(
      'NEXTAUTH_SECRET is required when NODE_ENV=production (generate one with `openssl rand -base64 32`)',
    );
  });

  it('rejects a short secret without echoing it', () => {
    expect(() => parseEnv({ NODE_ENV: 'production', NEXTAUTH_SECRET: 'short-secret' }, root())).toThrow(
      'NEXTAUTH_SECRET must be at least 32 characters (generate one with `openssl rand -base64 32`)',
    );
  });

  it('outside production, generates a secret once and keeps it in <data dir>/.secret (mode 600)', () => {
    const r = root();
    const first = parseEnv({ NODE_ENV: 'development' }, r);
    const second = parseEnv({ NODE_ENV: 'development' }, r);
    expect(first.secretSource).toBe('data-dir');
    expect(first.NEXTAUTH_SECRET.length).toBeGreaterThanOrEqual(32);
    expect(second.NEXTAUTH_SECRET).toBe(first.NEXTAUTH_SECRET);
    const file = join(r, 'data', '.secret');
    expect(readFileSync(file, 'utf8').trim()).toBe(first.NEXTAUTH_SECRET);
    expect(statSync(file).mode & 0o777).toBe(0o600);
  });

  it('applies the documented defaults; empty strings count as unset', () => {
    const r = root();
    const e = parseEnv({ NODE_ENV: 'test', DATABASE_URL: '', NEXTAUTH_URL: '  ' }, r);
    expect(e.database).toEqual({ provider: 'sqlite', url: 'file:./data/borderline.db', file: join(r, 'data', 'borderline.db') });
    expect(e.NEXTAUTH_URL).toBe('http://localhost:3000');
    expect(e.BORDERLINE_LOG_LEVEL).toBe('info');
    expect(e.dataDir).toBe(join(r, 'data'));
  });

  it('names the variable and the bad value for other mistakes', () => {
    expect(() => parseEnv({ BORDERLINE_LOG_LEVEL: 'loud' }, root())).toThrow(
      'BORDERLINE_LOG_LEVEL must be one of debug, info, warn, error (got "loud")',
    );
    expect(() => parseEnv({ NEXTAUTH_URL: 'ftp://files.example' }, root())).toThrow(
      'NEXTAUTH_URL must be an http:// or https:// URL (got "ftp://files.example")',
    );
    expect(() => parseEnv({ DATABASE_URL: 'sqlite:./x.db' }, root())).toThrow(
      'DATABASE_URL must start with "file:", "postgresql://" or "postgres://"; got a "sqlite:" URL',
    );
  });

  it('resolves where background work runs: in-process on SQLite, the job system on PostgreSQL', () => {
    const r = root();
    const pgUrl = 'postgresql://app@db.example:5432/borderline';
    expect(parseEnv({ NODE_ENV: 'test' }, r).jobs).toBe('in-process');
    expect(parseEnv({ NODE_ENV: 'test', DATABASE_URL: pgUrl }, r).jobs).toBe('job-system');
    expect(parseEnv({ NODE_ENV: 'test', DATABASE_URL: pgUrl, BORDERLINE_JOBS: 'in-process' }, r).jobs).toBe('in-process');
    // Expected texts: the messages written in lib/server/env.ts.
    expect(() => parseEnv({ NODE_ENV: 'test', BORDERLINE_JOBS: 'job-system' }, r)).toThrow(
      'BORDERLINE_JOBS is job-system, which needs a PostgreSQL DATABASE_URL (the embedded database runs background work in-process)',
    );
    expect(() => parseEnv({ BORDERLINE_JOBS: 'queue' }, r)).toThrow('BORDERLINE_JOBS must be auto, in-process or job-system (got "queue")');
    expect(() => parseEnv({ BORDERLINE_FIT_LEASE_SECONDS: '2' }, r)).toThrow('BORDERLINE_FIT_LEASE_SECONDS must be at least 3 (seconds) (got "2")');
    expect(() => parseEnv({ BORDERLINE_WORKER_CONCURRENCY: '1.5' }, r)).toThrow('BORDERLINE_WORKER_CONCURRENCY must be a whole number (got "1.5")');
    expect(() => parseEnv({ BORDERLINE_WORKER_WARM_HOURS: '-1' }, r)).toThrow('BORDERLINE_WORKER_WARM_HOURS must be 0 or more (got "-1")');
    expect(() => parseEnv({ BORDERLINE_SESSION_HOURS: '200' }, r)).toThrow('BORDERLINE_SESSION_HOURS must be at most 168 (one week) (got "200")');
  });

  it('env() validates once and caches', () => {
    const saved = { ...process.env };
    try {
      process.env.DATABASE_URL = `file:${join(dir, 'cached.db')}`;
      process.env.NEXTAUTH_SECRET = 'x'.repeat(40);
      resetEnvCache();
      const a = env();
      process.env.DATABASE_URL = 'mysql://changed';
      expect(env()).toBe(a);
      resetEnvCache();
      expect(() => env()).toThrow(ConfigError);
    } finally {
      process.env = saved;
      resetEnvCache();
    }
  });
});

// Readiness (lib/server/readiness.ts, GET /api/ready): ready only when the database answers and
// its migrations are current. Runs on SQLite, and on PostgreSQL with BORDERLINE_TEST_DATABASE.
// The stopped-database case is in test/fault/pg-outage.test.ts (a private cluster it can stop).
import { readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { GET } from '@/app/api/ready/route';
import type { Db } from '@/lib/server/db';
import { defaultMigrationsDir } from '@/lib/server/migrate/runner';
import { readiness } from '@/lib/server/readiness';
import { openAppDatabase, type AppDatabase } from './auth-harness';
import { copyMigrations, createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';

const repoMigrations = readdirSync(defaultMigrationsDir(TEST_PROVIDER)).filter((n) => /^\d{4}_/.test(n)).sort();

let app: AppDatabase;
const quiet = () => vi.spyOn(process.stderr, 'write').mockImplementation(() => true);

beforeAll(async () => {
  app = await openAppDatabase();
});
afterAll(async () => {
  await app.close();
});

describe('readiness', () => {
  it('is ready on a migrated database; GET /api/ready answers 200 without caching', async () => {
    const r = await readiness();
    expect(r).toMatchObject({
      ready: true,
      database: TEST_PROVIDER,
      migrations: { applied: repoMigrations.length, latest: repoMigrations.at(-1), unknown: [] },
    });
    const res = await GET();
    expect(res.status).toBe(200);
    expect(res.headers.get('cache-control')).toBe('no-store');
    expect(res.headers.get('retry-after')).toBeNull();
    expect(await res.json()).toMatchObject({ ready: true, database: TEST_PROVIDER });
  });

  it('is not ready on a database without migrations', async () => {
    const t = await createTestDatabase();
    const spy = quiet();
    try {
      const r = await readiness({ client: t.client(), provider: t.provider });
      expect(r).toMatchObject({ ready: false, reason: 'migrations', message: 'The database has no migrations applied; run npm run db:migrate.' });
    } finally {
      spy.mockRestore();
      await t.drop();
    }
  });

  it('is not ready when a migration of this code is pending or was edited after being applied', async () => {
    const pending = copyMigrations(TEST_PROVIDER, { extra: [{ name: '9990_pending_probe', sql: 'CREATE TABLE "ReadyProbe" ("id" INTEGER PRIMARY KEY);' }] });
    const edited = copyMigrations(TEST_PROVIDER);
    writeFileSync(join(edited.dir, repoMigrations[0], 'migration.sql'), '-- edited\n', { flag: 'a' });
    const spy = quiet();
    try {
      expect(await readiness({ migrationsDir: pending.dir })).toMatchObject({
        ready: false,
        reason: 'migrations',
        message: 'Migrations are not current (1 pending); run npm run db:migrate.',
      });
      expect(await readiness({ migrationsDir: edited.dir })).toMatchObject({
        ready: false,
        reason: 'migrations',
        message: 'Migrations are not current (1 edited after being applied); run npm run db:migrate.',
      });
      // The log names them (the public answer only counts them).
      const lines = spy.mock.calls.map((c) => JSON.parse(String(c[0])));
      expect(lines.find((l) => l.msg === 'migrations not current')).toMatchObject({ level: 'warn', pending: ['9990_pending_probe'], changed: [] });
    } finally {
      spy.mockRestore();
      pending.remove();
      edited.remove();
    }
  });

  it('stays ready when the database has a migration this code does not know (a newer release), and says so', async () => {
    const t: TestDatabase = await createTestDatabase();
    const newer = copyMigrations(TEST_PROVIDER, { extra: [{ name: '9991_newer_release', sql: 'CREATE TABLE "NewerProbe" ("id" INTEGER PRIMARY KEY);' }] });
    try {
      await t.migrate({ migrationsDir: newer.dir });
      const r = await readiness({ client: t.client(), provider: t.provider });
      expect(r).toMatchObject({ ready: true, migrations: { applied: repoMigrations.length, unknown: ['9991_newer_release'] } });
    } finally {
      newer.remove();
      await t.drop();
    }
  });

  it('answers not ready within its timeout when the database does not answer', async () => {
    const hung = { $queryRawUnsafe: () => new Promise<never>(() => undefined) } as unknown as Db;
    const spy = quiet();
    try {
      const r = await readiness({ client: hung, provider: TEST_PROVIDER, timeoutMs: 50 });
      expect(r).toMatchObject({ ready: false, reason: 'database', message: 'The database is not answering.' });
      expect(JSON.parse(String(spy.mock.calls[0][0]))).toMatchObject({ level: 'warn', msg: 'not ready', reason: 'database', outage: 'timeout' });
    } finally {
      spy.mockRestore();
    }
  });
});

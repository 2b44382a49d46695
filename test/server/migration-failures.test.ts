// What the migration runner refuses or survives: a failing migration (the whole run is rolled
// back and the database is exactly as before), an applied migration whose SQL was edited, a
// database migrated by a newer version, and several processes migrating at the same time.

import { spawn } from 'node:child_process';
import { appendFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { MIGRATIONS_TABLE } from '@/lib/server/migrate/constants';
import { applyMigrations, migrationStatus, MigrationError } from '@/lib/server/migrate/runner';
import { prepareDatabase, StartupError } from '@/lib/server/startup';
import { copyMigrations, createTestDatabase, snapshot, TEST_PROVIDER, type TestDatabase } from './db-harness';

type Run = { code: number | null; stdout: string; stderr: string };

/** Runs `npm run db:migrate`'s script as a separate process against `url`. */
function runCli(url: string, args: string[]): Promise<Run> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', 'scripts/db-migrate.ts', ...args], {
      env: { ...process.env, DATABASE_URL: url, BORDERLINE_LOG_LEVEL: 'info' },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d) => (stdout += d));
    child.stderr.on('data', (d) => (stderr += d));
    child.on('error', reject);
    child.on('close', (code) => resolve({ code, stdout, stderr }));
  });
}

/** The migrations of this release, in order, as written in prisma/migrations (listed by hand). */
const RELEASE = [
  '0001_init',
  '0002_audit_append_only',
  '0003_job_system',
  '0004_split_decision_note',
  '0005_queue_lease_index',
  '0006_standing_drop_suspicion_index',
  '0007_sample_project_id_index',
  '0008_import_chunk_uncompressed',
];
const AFTER_0001 = RELEASE.slice(1);

const BROKEN = 'CREATE TABLE "Broken" ("id" INTEGER);\nINSERT INTO "NoSuchTable" VALUES (1);\n';
// Expected texts: SQLite's and PostgreSQL's own error messages for a missing table
// (observed from the databases, the first part is the runner's wording).
const BROKEN_REASON = TEST_PROVIDER === 'sqlite' ? 'no such table: NoSuchTable' : 'relation "NoSuchTable" does not exist';

describe(`migration failures on ${TEST_PROVIDER}`, () => {
  let t: TestDatabase;
  const removals: (() => void)[] = [];
  beforeEach(async () => {
    t = await createTestDatabase();
  });
  afterEach(async () => {
    await t.drop();
    for (const remove of removals.splice(0)) remove();
  });

  /** A database at 0001 holding a user and an audit event. */
  async function databaseAt0001(): Promise<void> {
    const upTo1 = copyMigrations(t.provider, { upTo: '0001_init' });
    removals.push(upTo1.remove);
    await t.migrate({ migrationsDir: upTo1.dir });
    const db = t.client();
    await db.user.create({ data: { id: 'u1', email: 'kept@example.test', name: 'Kept', passwordHash: 'x' } });
    await db.auditEvent.create({ data: { action: 'team.created' } });
    await db.$disconnect();
  }

  it('a failing migration rolls back the whole run: schema and data exactly as before', async () => {
    await databaseAt0001();
    const broken = copyMigrations(t.provider, { extra: [{ name: '0099_broken', sql: BROKEN }] });
    removals.push(broken.remove);
    const before = await snapshot(t);

    const error = await applyMigrations(t.config, { migrationsDir: broken.dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    expect((error as MigrationError).message).toBe(
      `Migration 0099_broken failed: ${BROKEN_REASON}. Nothing from this run was applied; the database is as it was.`,
    );
    // The migrations after 0001 were pending too and succeeded inside the run; they must be gone with the rest.
    expect(await snapshot(t)).toEqual(before);
    const status = await migrationStatus(t.config, { migrationsDir: broken.dir });
    expect(status.entries.map((e) => `${e.name}:${e.state}`)).toEqual(['0001_init:applied', ...AFTER_0001.map((m) => `${m}:pending`), '0099_broken:pending']);

    // Without the broken migration the same database upgrades normally.
    expect((await t.migrate()).applied).toEqual(AFTER_0001);
    expect(await t.client().user.count()).toBe(1);
  });

  it('prepareDatabase and the CLI report the failed migration as one line and exit 1', async () => {
    await databaseAt0001();
    const broken = copyMigrations(t.provider, { extra: [{ name: '0099_broken', sql: BROKEN }] });
    removals.push(broken.remove);
    const expected = `Migration 0099_broken failed: ${BROKEN_REASON}. Nothing from this run was applied; the database is as it was.`;

    const error = await prepareDatabase({ env: { DATABASE_URL: t.url }, migrationsDir: broken.dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(StartupError);
    expect((error as StartupError).message).toBe(expected);

    const run = await runCli(t.url, ['--quiet', '--migrations-dir', broken.dir]);
    expect(run.code).toBe(1);
    expect(run.stderr).toBe(`db:migrate: ${expected}\n`);
  });

  it('a migration that leaves broken foreign keys is refused and rolled back', async () => {
    await databaseAt0001();
    const orphan = copyMigrations(t.provider, {
      extra: [
        {
          name: '0099_orphans',
          sql: `INSERT INTO "Membership" ("id", "teamId", "userId", "role", "updatedAt") VALUES ('m1', 'no-such-team', 'u1', 'lead', CURRENT_TIMESTAMP);\n`,
        },
      ],
    });
    removals.push(orphan.remove);
    const before = await snapshot(t);
    const error = await applyMigrations(t.config, { migrationsDir: orphan.dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    // SQLite: the runner's foreign_key_check before commit; PostgreSQL: the constraint itself.
    const reason =
      TEST_PROVIDER === 'sqlite'
        ? 'it leaves 1 foreign key violation(s), first in table Membership'
        : 'insert or update on table "Membership" violates foreign key constraint "Membership_teamId_fkey"';
    expect((error as MigrationError).message).toBe(
      `Migration 0099_orphans failed: ${reason}. Nothing from this run was applied; the database is as it was.`,
    );
    expect(await snapshot(t)).toEqual(before);
  });

  it('refuses to run when an applied migration was edited (checksum differs), changing nothing', async () => {
    await t.migrate();
    const edited = copyMigrations(t.provider);
    removals.push(edited.remove);
    const file = join(edited.dir, '0001_init', 'migration.sql');
    appendFileSync(file, '\n-- an innocent-looking edit\n');
    const before = await snapshot(t);
    const error = await applyMigrations(t.config, { migrationsDir: edited.dir }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(MigrationError);
    expect((error as MigrationError).kind).toBe('changed');
    expect((error as MigrationError).message).toBe(
      `Migration 0001_init was edited after it was applied to this database (checksum differs); restore ${file} and put changes in a new migration.`,
    );
    expect(await snapshot(t)).toEqual(before);
    const status = await migrationStatus(t.config, { migrationsDir: edited.dir });
    expect(status.entries.find((e) => e.name === '0001_init')?.state).toBe('changed');
  });

  it('refuses a database that has a migration this code does not know', async () => {
    await t.migrate();
    const older = copyMigrations(t.provider, { upTo: '0001_init' });
    removals.push(older.remove);
    const error = await applyMigrations(t.config, { migrationsDir: older.dir }).catch((e: unknown) => e);
    expect((error as MigrationError).message).toBe(
      `The database has migration 0002_audit_append_only applied, but ${older.dir} does not contain it; this database was migrated by a newer version of Borderline.`,
    );
  });

  it('three processes migrating at once apply each migration exactly once', async () => {
    // A slow third migration widens the window in which the others must wait for the lock.
    const slowSql =
      TEST_PROVIDER === 'sqlite'
        ? 'CREATE TABLE "Slow" AS WITH RECURSIVE c(x) AS (SELECT 1 UNION ALL SELECT x + 1 FROM c WHERE x < 1500000) SELECT count(*) AS n FROM c;\n'
        : 'CREATE TABLE "Slow" AS SELECT 1 AS n FROM pg_sleep(1.5);\n';
    const withSlow = copyMigrations(t.provider, { extra: [{ name: '0099_slow', sql: slowSql }] });
    removals.push(withSlow.remove);

    const runs = await Promise.all([1, 2, 3].map(() => runCli(t.url, ['--migrations-dir', withSlow.dir])));
    for (const run of runs) expect({ code: run.code, stderr: run.stderr }).toEqual({ code: 0, stderr: '' });
    const appliers = runs.filter((r) => r.stdout.includes(`Applied ${RELEASE.length + 1} migration(s)`));
    const waiters = runs.filter((r) => /is up to date\./.test(r.stdout));
    expect(appliers).toHaveLength(1);
    expect(waiters).toHaveLength(2);

    const db = t.client();
    const rows = await db.$queryRawUnsafe<{ name: string }[]>(`SELECT "name" FROM "${MIGRATIONS_TABLE}" ORDER BY "name"`);
    expect(rows.map((r) => r.name)).toEqual([...RELEASE, '0099_slow']);
    const slow = await db.$queryRawUnsafe<{ n: unknown }[]>('SELECT "n" FROM "Slow"');
    expect(slow).toHaveLength(1);
  });
});

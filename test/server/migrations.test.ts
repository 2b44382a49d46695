// Migrations: a fresh database migrates to exactly the schema of prisma/schema.prisma (compared by
// Prisma's own schema engine, introspecting the live database), the committed snapshots are in
// step with the schema, and the audit log refuses UPDATE and DELETE.

import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { diffDatabaseToSchema, diffSchemas } from '@/lib/server/migrate/engine';
import { currentSchema, latestSnapshot, PROVIDERS } from '@/lib/server/migrate/create';
import {
  checksumOf,
  defaultMigrationsDir,
  migrationStatus,
  planMigrations,
  readMigrations,
  MigrationError,
} from '@/lib/server/migrate/runner';
import { copyMigrations, createTestDatabase, refusal, TEST_PROVIDER, type TestDatabase } from './db-harness';

describe(`migrations on ${TEST_PROVIDER}`, () => {
  let t: TestDatabase;
  beforeAll(async () => {
    t = await createTestDatabase();
  });
  afterAll(async () => {
    await t.drop();
  });

  it('applies every migration to a fresh database, in order', async () => {
    const expected = readMigrations(defaultMigrationsDir(t.provider)).map((m) => m.name);
    expect(expected.slice(0, 2)).toEqual(['0001_init', '0002_audit_append_only']);
    const result = await t.migrate();
    expect(result.applied).toEqual(expected);
  });

  it('leaves a database whose schema matches prisma/schema.prisma (schema-engine diff is empty)', async () => {
    // Reference: Prisma's schema engine (@prisma/schema-engine-wasm) introspects the live database
    // and diffs it against the datamodel; an empty diff means tables, columns, types, defaults,
    // indexes and foreign keys all match.
    const drift = await diffDatabaseToSchema(t.config, currentSchema(t.provider));
    expect(drift).toBe('');
  });

  it('the diff does see a difference when there is one (the comparison can fail)', async () => {
    const altered = currentSchema(t.provider).replace(
      /model LoginThrottle \{/,
      'model ExtraTable {\n  id Int @id\n}\n\nmodel LoginThrottle {',
    );
    const drift = await diffDatabaseToSchema(t.config, altered);
    expect(drift).toContain('ExtraTable');
  });

  it('records each migration with its checksum; a second run applies nothing', async () => {
    const status = await migrationStatus(t.config);
    expect(status.entries.every((e) => e.state === 'applied')).toBe(true);
    const again = await t.migrate();
    expect(again.applied).toEqual([]);
  });

  it.skipIf(TEST_PROVIDER !== 'postgresql')('stores staged upload chunks uncompressed (0008: storage EXTERNAL, not the default EXTENDED)', async () => {
    // attstorage codes, PostgreSQL documentation of pg_attribute: 'x' extended, 'e' external.
    const rows = await t.client().$queryRawUnsafe<{ attstorage: string }[]>(
      `SELECT "attstorage"::text AS "attstorage" FROM "pg_attribute" WHERE "attrelid" = '"ImportChunk"'::regclass AND "attname" = 'data'`,
    );
    expect(rows).toEqual([{ attstorage: 'e' }]);
  });

  it('makes the audit log append-only (UPDATE and DELETE refused, INSERT allowed)', async () => {
    const db = t.client();
    const event = await db.auditEvent.create({ data: { action: 'team.created', detail: '{}' } });
    // Expected texts: the RAISE messages written in 0002_audit_append_only/migration.sql.
    expect(await refusal(db.auditEvent.update({ where: { id: event.id }, data: { action: 'changed' } }))).toBe(
      'AuditEvent is append-only: UPDATE is not allowed',
    );
    expect(await refusal(db.auditEvent.delete({ where: { id: event.id } }))).toBe(
      'AuditEvent is append-only: DELETE is not allowed',
    );
    expect(await refusal(db.$executeRawUnsafe('DELETE FROM "AuditEvent"'))).toBe(
      'AuditEvent is append-only: DELETE is not allowed',
    );
    const still = await db.auditEvent.findUnique({ where: { id: event.id } });
    expect(still?.action).toBe('team.created');
  });
});

describe('migration folders', () => {
  it.each(PROVIDERS)('%s: the newest snapshot equals prisma/schema.prisma (no unrecorded schema change)', async (provider) => {
    const snapshot = latestSnapshot(provider);
    expect(snapshot).not.toBeNull();
    expect(await diffSchemas(snapshot?.schema ?? null, currentSchema(provider))).toBe('');
  });

  it.each(PROVIDERS)('%s: every migration folder has migration.sql and a snapshot', (provider) => {
    const migrations = readMigrations(defaultMigrationsDir(provider));
    for (const m of migrations) {
      expect(readFileSync(`${m.path}/schema.prisma`, 'utf8')).toMatch(/datasource db/);
    }
  });

  it('both providers have the same migrations', () => {
    const names = PROVIDERS.map((p) => readMigrations(defaultMigrationsDir(p)).map((m) => m.name));
    expect(names[0]).toEqual(names[1]);
  });

  it('0001_init creates the schema from nothing: replaying the snapshot diff gives the same statements', async () => {
    // The generator wrote 0001 as diff(empty → snapshot); recomputing it must reproduce the body.
    for (const provider of PROVIDERS) {
      const init = readMigrations(defaultMigrationsDir(provider))[0];
      const snapshot = readFileSync(`${init.path}/schema.prisma`, 'utf8');
      const body = await diffSchemas(null, snapshot);
      expect(init.sql.endsWith(body)).toBe(true);
    }
  });

  it('checksums ignore CRLF versus LF line ends only', () => {
    // Reference: SHA-256 of the empty string, FIPS 180-4 test value (recalled from memory).
    expect(checksumOf('')).toBe('e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855');
    expect(checksumOf('a;\r\nb;\r\n')).toBe(checksumOf('a;\nb;\n'));
    expect(checksumOf('a;\nb;\n')).not.toBe(checksumOf('a;\nb; \n'));
  });

  it('refuses a migration that ends the transaction itself', () => {
    const copy = copyMigrations('sqlite', {
      upTo: '0001_init',
      extra: [{ name: '0002_commits', sql: 'CREATE TABLE "X" ("id" INTEGER);\nCOMMIT;\n' }],
    });
    try {
      expect(() => readMigrations(copy.dir)).toThrow(
        'Migration 0002_commits contains a transaction statement (BEGIN/COMMIT/ROLLBACK); the runner wraps each run in one transaction.',
      );
    } finally {
      copy.remove();
    }
  });

  it('does not mistake trigger bodies (BEGIN … END;) for transaction statements', () => {
    expect(() => readMigrations(defaultMigrationsDir('sqlite'))).not.toThrow();
    expect(() => readMigrations(defaultMigrationsDir('postgresql'))).not.toThrow();
  });

  it('refuses to apply a migration older than one already applied', () => {
    const m = (name: string) => ({ name, path: `/m/${name}`, sql: name, checksum: checksumOf(name) });
    const local = [m('0001_a'), m('0002_b'), m('0003_c')];
    const applied = [local[0], local[2]].map((x) => ({ name: x.name, checksum: x.checksum, appliedAt: '', executionMs: 0 }));
    expect(() => planMigrations(local, applied, '/m')).toThrow(MigrationError);
    expect(() => planMigrations(local, applied, '/m')).toThrow(
      'Migration 0002_b is not applied but the later migration 0003_c is; migrations must be applied in order.',
    );
    expect(planMigrations(local, applied.slice(0, 1), '/m').map((x) => x.name)).toEqual(['0002_b', '0003_c']);
  });
});

// Upgrade path: a database at migration 0001 holding data (users, team, project, samples with
// features, queue item and vote, audit events) is brought to the newest migration by the runner.
// Every row stays exactly as it was (compared with the raw drivers), features byte for byte, and
// 0002's triggers are active afterwards. The fixture rows are written with plain SQL in 0001's
// column layout, so the test keeps working when later migrations change the Prisma model.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { currentSchema } from '@/lib/server/migrate/create';
import { diffDatabaseToSchema } from '@/lib/server/migrate/engine';
import { MIGRATIONS_TABLE } from '@/lib/server/migrate/constants';
import { defaultMigrationsDir, readMigrations } from '@/lib/server/migrate/runner';
import { copyMigrations, createTestDatabase, refusal, snapshot, TEST_PROVIDER, type Snapshot, type TestDatabase } from './db-harness';

/** Feature vectors chosen to catch any conversion: -0, subnormal, ±∞, NaN payload, random bits. */
function fixtureFeatures(i: number): Uint8Array {
  const bytes = new Uint8Array(8 * 4);
  const special = [
    [0x00, 0x00, 0x00, 0x80], // -0 (IEEE-754 sign bit only; textbook fact)
    [0x01, 0x00, 0x00, 0x00], // smallest positive subnormal float32 (textbook fact)
    [0x00, 0x00, 0x80, 0x7f], // +Infinity (textbook fact)
    [0x01, 0x02, 0xc0, 0x7f], // a quiet NaN with a payload
  ];
  for (let k = 0; k < bytes.length; k++) bytes[k] = (i * 131 + k * 71 + 7) & 0xff;
  bytes.set(special[i % special.length], 0);
  return bytes;
}

/** The `name=value` fields of a snapshot row (db-harness.ts `snapshot` joins them with "|"). */
function fieldsOf(row: string): string[] {
  return row.split(/\|(?=[A-Za-z_][A-Za-z0-9_]*=)/);
}
function nameOf(field: string): string {
  return field.slice(0, field.indexOf('='));
}

describe(`upgrade from 0001_init on ${TEST_PROVIDER}`, () => {
  let t: TestDatabase;
  let copy: ReturnType<typeof copyMigrations>;
  let before: Snapshot;
  const features = new Map<string, Uint8Array>();

  beforeAll(async () => {
    t = await createTestDatabase();
    copy = copyMigrations(t.provider, { upTo: '0001_init' });
    const first = await t.migrate({ migrationsDir: copy.dir });
    expect(first.applied).toEqual(['0001_init']);

    const db = t.client();
    const param = (i: number) => (t.provider === 'sqlite' ? '?' : `$${i + 1}`);
    const insert = async (table: string, row: Record<string, unknown>) => {
      const columns = Object.keys(row);
      const sql = `INSERT INTO "${table}" (${columns.map((c) => `"${c}"`).join(', ')}) VALUES (${columns.map((_, i) => param(i)).join(', ')})`;
      await db.$executeRawUnsafe(sql, ...columns.map((c) => row[c]));
    };
    const at = new Date('2025-03-04T05:06:07.089Z');
    for (const u of ['u1', 'u2']) {
      await insert('User', { id: u, email: `${u}@example.test`, name: `User ${u}`, passwordHash: `$argon2id$fixture-${u}`, createdAt: at });
    }
    await insert('Team', { id: 'team1', name: 'Fixture team', createdAt: at });
    await insert('Membership', { id: 'm1', teamId: 'team1', userId: 'u1', role: 'lead', createdAt: at, updatedAt: at });
    await insert('Membership', { id: 'm2', teamId: 'team1', userId: 'u2', role: 'reviewer', createdAt: at, updatedAt: at });
    await insert('Project', {
      id: 'p1',
      teamId: 'team1',
      name: 'Fixture project',
      description: 'rows written at migration 0001',
      featureCount: 8,
      maxClasses: 50,
      settings: '{"scale":"l2"}',
      currentRevision: 0,
      createdAt: at,
      updatedAt: at,
    });
    await insert('ProjectClass', { id: 'c1', projectId: 'p1', name: 'refund', position: 0 });
    await insert('ProjectClass', { id: 'c2', projectId: 'p1', name: 'shipping', position: 1 });
    await insert('Revision', { id: 'r0', projectId: 'p1', number: 0, kind: 'import', note: '', changeCount: 0, createdById: 'u1', createdAt: at });
    for (let i = 0; i < 24; i++) {
      const id = `s${i}`;
      features.set(id, fixtureFeatures(i));
      await insert('Sample', {
        id,
        projectId: 'p1',
        externalId: `ext-${i}`,
        features: features.get(id),
        text: i % 3 === 0 ? null : `message ${i} — ünïcödé ✓`,
        imageRef: null,
        metadata: '{"channel":"email"}',
        originalLabel: i % 2 === 0 ? 'refund' : 'shipping',
        currentLabel: i % 2 === 0 ? 'refund' : 'shipping',
        labelRevision: 0,
        addedRevision: 0,
        createdAt: at,
        updatedAt: at,
      });
    }
    await insert('QueueItem', {
      id: 'q1',
      projectId: 'p1',
      sampleId: 's1',
      round: 1,
      revisionNumber: 0,
      state: 'one-vote',
      suspicion: 0.75,
      reasons: 'wrong-side',
      createdAt: at,
      updatedAt: at,
    });
    await insert('Vote', { id: 'v1', queueItemId: 'q1', userId: 'u2', decision: 'relabel', label: 'refund', note: null, createdAt: at });
    for (const action of ['team.created', 'member.added', 'member.added']) {
      await insert('AuditEvent', { teamId: 'team1', userId: 'u1', action, targetType: 'team', targetId: 'team1', detail: '{}', createdAt: at });
    }
    // At 0001 the audit log is not protected yet: an UPDATE goes through (and is undone here).
    expect(await db.$executeRawUnsafe(`UPDATE "AuditEvent" SET "action" = "action"`)).toBe(3);
    await t.client().$disconnect();
    before = await snapshot(t);
  });

  afterAll(async () => {
    await t.drop();
    copy.remove();
  });

  it('the fixture is really there before the upgrade', () => {
    expect(before.data.Sample).toHaveLength(24);
    expect(before.data.AuditEvent).toHaveLength(3);
    expect(before.data[MIGRATIONS_TABLE]).toHaveLength(1);
  });

  it('applies the newer migrations and keeps every row exactly as it was', async () => {
    const newer = readMigrations(defaultMigrationsDir(t.provider))
      .map((m) => m.name)
      .filter((n) => n > '0001_init');
    const result = await t.migrate();
    expect(result.applied).toEqual(newer);
    const after = await snapshot(t);
    const tables = Object.keys(before.data).filter((n) => n !== MIGRATIONS_TABLE);
    expect(tables.length).toBeGreaterThanOrEqual(16);
    for (const table of tables) {
      // A later migration may add nullable columns: on the old rows they must be NULL; every
      // column that existed before keeps its value exactly.
      const known = new Set((before.data[table][0] ? fieldsOf(before.data[table][0]) : []).map(nameOf));
      const added = after.data[table].flatMap((row) => fieldsOf(row).filter((f) => !known.has(nameOf(f)) && !f.endsWith('=null')));
      expect({ table, added }).toEqual({ table, added: [] });
      const rows = after.data[table].map((row) => (known.size === 0 ? row : fieldsOf(row).filter((f) => known.has(nameOf(f))).join('|')));
      expect({ table, rows }).toEqual({ table, rows: before.data[table] });
    }
    expect(after.data[MIGRATIONS_TABLE]).toHaveLength(1 + newer.length);
  });

  it('keeps the feature bytes identical when read back through Prisma', async () => {
    const samples = await t.client().sample.findMany({ select: { id: true, features: true } });
    expect(samples).toHaveLength(24);
    for (const s of samples) {
      expect(Buffer.from(s.features).equals(Buffer.from(features.get(s.id) ?? new Uint8Array()))).toBe(true);
    }
  });

  it("has 0002's triggers active: UPDATE and DELETE on AuditEvent refused, rows unchanged", async () => {
    const db = t.client();
    // Expected texts: the RAISE messages of 0002_audit_append_only/migration.sql.
    expect(await refusal(db.$executeRawUnsafe(`UPDATE "AuditEvent" SET "action" = 'x'`))).toBe(
      'AuditEvent is append-only: UPDATE is not allowed',
    );
    expect(await refusal(db.$executeRawUnsafe(`DELETE FROM "AuditEvent"`))).toBe('AuditEvent is append-only: DELETE is not allowed');
    expect(await db.auditEvent.count()).toBe(3);
    await db.auditEvent.create({ data: { action: 'member.added' } });
    expect(await db.auditEvent.count()).toBe(4);
  });

  it('ends at exactly the schema of prisma/schema.prisma', async () => {
    expect(await diffDatabaseToSchema(t.config, currentSchema(t.provider))).toBe('');
  });
});

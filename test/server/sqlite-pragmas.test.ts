// The embedded SQLite connection the app uses (lib/server/db.ts) runs with WAL, a busy timeout and
// foreign keys on — checked both by reading the PRAGMAs through the app's Prisma client and by
// their effects. Runs on SQLite whatever BORDERLINE_TEST_DATABASE says (SQLite is always there).

import { Worker } from 'node:worker_threads';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SQLITE_BUSY_TIMEOUT_MS } from '@/lib/server/db';
import { createTestDatabase, refusal, type TestDatabase } from './db-harness';

/** Holds SQLite's write lock from another thread for `ms` milliseconds. */
function holdWriteLock(file: string, ms: number): { locked: Promise<void>; released: Promise<void> } {
  const worker = new Worker(
    `const { parentPort, workerData } = require('node:worker_threads');
     const Database = require('better-sqlite3');
     const db = new Database(workerData.file);
     db.exec('BEGIN IMMEDIATE');
     db.prepare('INSERT INTO "Team" ("id", "name") VALUES (?, ?)').run('held-' + Date.now(), 'written under the lock');
     parentPort.postMessage('locked');
     Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, workerData.ms);
     db.exec('COMMIT');
     db.close();
     parentPort.postMessage('released');`,
    { eval: true, workerData: { file, ms } },
  );
  const message = (expected: string) =>
    new Promise<void>((resolve, reject) => {
      worker.on('message', (m) => m === expected && resolve());
      worker.on('error', reject);
    });
  return { locked: message('locked'), released: message('released') };
}

describe('SQLite connection settings', () => {
  let t: TestDatabase;
  beforeAll(async () => {
    t = await createTestDatabase('sqlite');
    await t.migrate();
  });
  afterAll(async () => {
    await t.drop();
  });

  it('reports WAL, the busy timeout and foreign keys on the app client', async () => {
    const db = t.client();
    const one = async (pragma: string) => Object.values((await db.$queryRawUnsafe<Record<string, unknown>[]>(`PRAGMA ${pragma}`))[0])[0];
    expect(await one('journal_mode')).toBe('wal');
    expect(Number(await one('busy_timeout'))).toBe(SQLITE_BUSY_TIMEOUT_MS);
    expect(SQLITE_BUSY_TIMEOUT_MS).toBe(5000);
    expect(Number(await one('foreign_keys'))).toBe(1);
  });

  it('WAL is recorded in the database file itself (seen by a plain connection)', () => {
    const plain = new Database(t.config.provider === 'sqlite' ? t.config.file : '', { readonly: true });
    try {
      expect(plain.pragma('journal_mode', { simple: true })).toBe('wal');
    } finally {
      plain.close();
    }
  });

  it('enforces foreign keys (a membership of a missing team is refused)', async () => {
    const db = t.client();
    // Expected text: SQLite's message for a foreign key failure.
    expect(
      await refusal(
        db.$executeRawUnsafe(
          `INSERT INTO "Membership" ("id", "teamId", "userId", "role", "updatedAt") VALUES ('m', 'nope', 'nope', 'lead', CURRENT_TIMESTAMP)`,
        ),
      ),
    ).toBe('FOREIGN KEY constraint failed');
  });

  it('waits for another writer instead of failing at once (busy timeout in effect)', async () => {
    const db = t.client();
    await db.team.count(); // connect first
    const file = t.config.provider === 'sqlite' ? t.config.file : '';

    // Control: a connection without a busy timeout fails at once while the lock is held.
    const first = holdWriteLock(file, 600);
    await first.locked;
    const impatient = new Database(file, { timeout: 0 });
    expect(() => impatient.prepare('INSERT INTO "Team" ("id", "name") VALUES (?, ?)').run('impatient', 'x')).toThrow(
      /database is locked/,
    );
    impatient.close();
    await first.released;

    // The app's client waits for the lock and then writes.
    const second = holdWriteLock(file, 600);
    await second.locked;
    const created = await db.team.create({ data: { name: 'written after waiting' } });
    await second.released;
    expect(await db.team.findUnique({ where: { id: created.id } })).not.toBeNull();
    expect(await db.team.count({ where: { name: 'written under the lock' } })).toBe(2);
  });
});

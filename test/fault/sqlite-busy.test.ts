// Fault test "SQLite locked past its busy timeout": another connection holds the embedded
// database's write lock (BEGIN IMMEDIATE) longer than busy_timeout (5 s, lib/server/db.ts).
// Writes through the wrappers answer the retryable "database not answering" failure instead of
// a 500; reads keep working (WAL: readers do not wait for the writer); once the lock is released
// the same writes succeed, and the refused ones left nothing behind. Always on SQLite (it is
// about SQLite), whatever BORDERLINE_TEST_DATABASE says.

import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { createInvitation } from '@/app/actions/create-invitation';
import { createTeam } from '@/app/actions/create-team';
import { GET as exportRoute } from '@/app/api/projects/[projectId]/export/route';
import { GET as readyRoute } from '@/app/api/ready/route';
import { resetAuthOptionsForTests } from '@/lib/server/auth/options';
import { MESSAGES } from '@/lib/server/authz/errors';
import { disconnectDb, type Db } from '@/lib/server/db';
import { resetEnvCache } from '@/lib/server/env';
import { buildFixture, call, contextFor, sessionFor, TEST_SECRET, type Fixture } from '../server/auth-harness';
import { createTestDatabase, type TestDatabase } from '../server/db-harness';

const UNAVAILABLE = { ok: false, status: 503, error: MESSAGES.unavailable, retryable: true };

describe('SQLite write lock held past busy_timeout', () => {
  let t: TestDatabase;
  let admin: Db;
  let f: Fixture;
  let cookie: string;
  const saved = { DATABASE_URL: process.env.DATABASE_URL, NEXTAUTH_SECRET: process.env.NEXTAUTH_SECRET };

  beforeAll(async () => {
    t = await createTestDatabase('sqlite');
    await t.migrate();
    process.env.DATABASE_URL = t.url;
    process.env.NEXTAUTH_SECRET = TEST_SECRET;
    resetEnvCache();
    resetAuthOptionsForTests();
    admin = t.client();
    f = await buildFixture(admin);
    cookie = await sessionFor(f.leadA);
  });
  afterAll(async () => {
    await disconnectDb();
    await t.drop();
    process.env.DATABASE_URL = saved.DATABASE_URL;
    process.env.NEXTAUTH_SECRET = saved.NEXTAUTH_SECRET;
    resetEnvCache();
    resetAuthOptionsForTests();
  });

  const asLead = <T>(fn: () => Promise<T>) => call(contextFor(cookie), fn);
  const counts = async () => ({ teams: await admin.team.count(), invitations: await admin.invitation.count(), audit: await admin.auditEvent.count() });

  it('refuses writes as retryable while locked, keeps serving reads, and writes again once released', async () => {
    if (t.config.provider !== 'sqlite') throw new Error('expected SQLite');
    const before = await counts();
    const lock = new Database(t.config.file);
    const stderr = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    try {
      lock.exec('BEGIN IMMEDIATE');
      expect(await asLead(() => createTeam({ name: 'While locked' }))).toEqual(UNAVAILABLE);
      expect(await asLead(() => createInvitation({ teamId: f.teamA, role: 'reviewer', expiresInHours: 24 }))).toEqual(UNAVAILABLE);
      const exported = await asLead(() =>
        exportRoute(new Request(`http://127.0.0.1/api/projects/${f.projectA}/export?format=csv`), { params: Promise.resolve({ projectId: f.projectA }) }),
      );
      expect(exported.status).toBe(200);
      expect((await readyRoute()).status).toBe(200);
      const lines = stderr.mock.calls.map((c) => String(c[0])).filter((l) => l.startsWith('{')).map((l) => JSON.parse(l) as Record<string, unknown>);
      expect(lines.filter((l) => l.msg === 'database unavailable').map((l) => [l.endpoint, l.outage])).toEqual([
        ['createTeam', 'busy'],
        ['createInvitation', 'busy'],
      ]);
    } finally {
      stderr.mockRestore();
      if (lock.inTransaction) lock.exec('ROLLBACK');
      lock.close();
    }
    expect(await counts()).toEqual(before);
    expect(await asLead(() => createTeam({ name: 'After the lock' }))).toMatchObject({ ok: true });
    // createTeam writes 1 team and 2 audit events (lib/server/dal/teams.ts).
    expect(await counts()).toEqual({ teams: before.teams + 1, invitations: before.invitations, audit: before.audit + 2 });
  });
});

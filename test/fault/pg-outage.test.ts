// Fault test "stop PostgreSQL briefly": the app's own client (db(), the process-wide Prisma
// client with @prisma/adapter-pg's pool) talks to a private, throwaway PostgreSQL cluster
// (test/fault/pg-cluster.ts — never the shared server on 5432, which other tests use at the same
// time). Requests succeed → `pg_ctl stop -m fast` → the same requests answer the retryable
// "database not answering" failure (actions), 503 + Retry-After (routes) and not-ready
// (readiness), and none hangs or answers 500 → the cluster starts again → the same requests
// succeed again with the same client (nothing restarted) → the rows are exactly those of the
// successful writes: the writes tried during the outage, including a transaction cut in the
// middle, left nothing behind.
//
// Runs in the main vitest run (`npx vitest run`, part of `npm test`), whatever
// BORDERLINE_TEST_DATABASE says: it brings its own PostgreSQL. Skipped only when PostgreSQL's
// initdb is not installed.

import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { createInvitation } from '@/app/actions/create-invitation';
import { createTeam } from '@/app/actions/create-team';
import { GET as exportRoute } from '@/app/api/projects/[projectId]/export/route';
import { GET as readyRoute } from '@/app/api/ready/route';
import { GET as labelsRoute } from '@/app/api/v1/projects/[projectId]/labels/route';
import { resetAuthOptionsForTests } from '@/lib/server/auth/options';
import { defineSignedInAction } from '@/lib/server/authz/define';
import { MESSAGES, RETRY_AFTER_SECONDS } from '@/lib/server/authz/errors';
import { createDb, db, disconnectDb, type Db } from '@/lib/server/db';
import { parseDatabaseUrl, resetEnvCache } from '@/lib/server/env';
import { prepareDatabase } from '@/lib/server/startup';
import { CreateTeamInput } from '@/lib/domain';
import { buildFixture, call, contextFor, sessionFor, TEST_SECRET, type Fixture } from '../server/auth-harness';
import { findPgBinaries, startPrivateCluster, type PrivateCluster } from './pg-cluster';

const bins = findPgBinaries();

/**
 * "Never hangs": every request during the outage must settle well within this bound. It is a
 * guard against an unbounded wait (a hung request would otherwise only end at vitest's 120 s
 * test timeout with no useful message), not a speed assertion; the measured times are printed.
 */
const SETTLE_BOUND_MS = 30_000;

async function settles<T>(label: string, run: () => Promise<T>): Promise<T> {
  const started = performance.now();
  let timer: NodeJS.Timeout | undefined;
  const hung = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`${label} did not settle within ${SETTLE_BOUND_MS} ms (hung)`)), SETTLE_BOUND_MS);
  });
  try {
    return await Promise.race([run(), hung]);
  } finally {
    clearTimeout(timer);
    timings.push(`${label}: ${Math.round(performance.now() - started)} ms`);
  }
}
const timings: string[] = [];

const UNAVAILABLE = { ok: false, status: 503, error: MESSAGES.unavailable, retryable: true };

describe.skipIf(bins === null)('PostgreSQL stopped briefly under a running app (private cluster)', () => {
  let cluster: PrivateCluster | undefined;
  let admin: Db;
  let f: Fixture;
  let leadCookie: string;
  const saved = { DATABASE_URL: process.env.DATABASE_URL, NEXTAUTH_SECRET: process.env.NEXTAUTH_SECRET };

  beforeAll(async () => {
    if (bins === null) return;
    cluster = await startPrivateCluster(bins);
    const setup = new pg.Client({ connectionString: cluster.url });
    await setup.connect();
    await setup.query('CREATE DATABASE borderline');
    await setup.end();
    const url = cluster.urlOf('borderline');
    await prepareDatabase({ env: { DATABASE_URL: url } });
    process.env.DATABASE_URL = url;
    process.env.NEXTAUTH_SECRET = TEST_SECRET;
    resetEnvCache();
    resetAuthOptionsForTests();
    admin = createDb(parseDatabaseUrl(url));
    f = await buildFixture(admin);
    leadCookie = await sessionFor(f.leadA);
  });

  afterAll(async () => {
    // Clean up even when a step failed: clients first, then the cluster and its folder.
    await disconnectDb().catch(() => undefined);
    await admin?.$disconnect().catch(() => undefined);
    try {
      cluster?.destroy();
    } finally {
      process.env.DATABASE_URL = saved.DATABASE_URL;
      process.env.NEXTAUTH_SECRET = saved.NEXTAUTH_SECRET;
      resetEnvCache();
      resetAuthOptionsForTests();
      if (timings.length > 0) console.log(`[pg-outage] ${timings.join('; ')}`);
    }
  });

  // ── the requests, each through its real wrapper ──
  const asLead = <T>(fn: () => Promise<T>) => call(contextFor(leadCookie), fn);
  const invite = () => asLead(() => createInvitation({ teamId: f.teamA, role: 'reviewer', expiresInHours: 24 }));
  const newTeam = (name: string) => asLead(() => createTeam({ name }));
  const exportCsv = () =>
    asLead(() =>
      exportRoute(new Request(`http://127.0.0.1/api/projects/${f.projectA}/export?format=csv`), {
        params: Promise.resolve({ projectId: f.projectA }),
      }),
    );
  const labels = () =>
    asLead(() =>
      labelsRoute(
        new Request(`http://127.0.0.1/api/v1/projects/${f.projectA}/labels`, { headers: { authorization: `Bearer ${f.tokenA.secret}` } }),
        { params: Promise.resolve({ projectId: f.projectA }) },
      ),
    );

  /** Rows that the requests above can write, counted with a client of its own. */
  async function counts() {
    return {
      teams: await admin.team.count(),
      memberships: await admin.membership.count(),
      invitations: await admin.invitation.count(),
      audit: await admin.auditEvent.count(),
    };
  }

  /** Every team keeps at least one lead (the team invariant the writes above maintain). */
  async function teamsWithoutLead(): Promise<number> {
    const teams = await admin.team.findMany({ select: { id: true, memberships: { where: { role: 'lead' }, select: { id: true } } } });
    return teams.filter((t) => t.memberships.length === 0).length;
  }

  it('answers, fails cleanly while the database is stopped, and recovers without a restart', async () => {
    if (cluster === undefined) throw new Error('no cluster');
    const warnings = vi.spyOn(process.stderr, 'write');
    try {
      // 1. Healthy: every request succeeds through the app's process-wide client.
      expect(await invite()).toMatchObject({ ok: true });
      expect(await newTeam('Before the outage')).toMatchObject({ ok: true });
      expect((await exportCsv()).status).toBe(200);
      expect((await labels()).status).toBe(200);
      expect((await readyRoute()).status).toBe(200);
      const before = await counts();
      const appClient = db();

      // A transaction through the wrapper that has written its first rows when the server stops.
      // (A signed-in action under a registered name, with a handler of this test's own.)
      let reached!: () => void;
      const wroteFirstRow = new Promise<void>((resolve) => (reached = resolve));
      let proceed!: () => void;
      const serverStopped = new Promise<void>((resolve) => (proceed = resolve));
      const cutAction = defineSignedInAction({ name: 'createTeam', input: CreateTeamInput }, async (input, caller) =>
        caller.db.$transaction(
          async (tx) => {
            const team = await tx.team.create({ data: { name: input.name } });
            reached();
            await serverStopped;
            await tx.membership.create({ data: { teamId: team.id, userId: caller.user.id, role: 'lead' } });
            return team.id;
          },
          { timeout: 60_000 },
        ),
      );
      const inFlight = asLead(() => cutAction({ name: 'Cut mid-transaction' }));
      await wroteFirstRow;

      // 2. Outage.
      cluster.stop();
      proceed();
      expect(await settles('transaction cut by the shutdown', () => inFlight)).toEqual(UNAVAILABLE);
      expect(await settles('action createInvitation', invite)).toEqual(UNAVAILABLE);
      expect(await settles('action createTeam', () => newTeam('During the outage'))).toEqual(UNAVAILABLE);
      for (const [label, run] of [
        ['route exportData', exportCsv],
        ['token route apiLabels', labels],
      ] as const) {
        const res = await settles(label, run);
        expect(res.status, label).toBe(503);
        expect(res.headers.get('retry-after'), label).toBe(String(RETRY_AFTER_SECONDS));
        expect(await res.json(), label).toEqual({ error: MESSAGES.unavailable, retryable: true });
      }
      const notReady = await settles('readiness', readyRoute);
      expect(notReady.status).toBe(503);
      expect(notReady.headers.get('retry-after')).toBe(String(RETRY_AFTER_SECONDS));
      expect(await notReady.json()).toMatchObject({ ready: false, reason: 'database', message: 'The database is not answering.' });
      // A second round while still down (now on a pool with no live connections at all).
      expect(await settles('action createInvitation again', invite)).toEqual(UNAVAILABLE);

      // Logged as one JSON warning per failed request, never as a 500 with a stack.
      const written = warnings.mock.calls.map((c) => String(c[0]));
      const logged = written.filter((l) => l.startsWith('{'));
      const outageLines = logged.map((l) => JSON.parse(l) as { msg: string; level: string }).filter((l) => l.msg === 'database unavailable');
      expect(outageLines.length).toBeGreaterThanOrEqual(6);
      expect(outageLines.every((l) => l.level === 'warn')).toBe(true);
      expect(written.some((l) => l.includes('unexpected error'))).toBe(false);

      // 3. Back: the same client (not re-created) serves again on the first try.
      cluster.start();
      expect(db()).toBe(appClient);
      expect((await readyRoute()).status).toBe(200);
      expect(await invite()).toMatchObject({ ok: true });
      expect(await newTeam('After the outage')).toMatchObject({ ok: true });
      expect((await exportCsv()).status).toBe(200);
      expect((await labels()).status).toBe(200);

      // 4. No corruption: exactly the two successful writes after the restart were added
      // (createInvitation: 1 invitation + 1 audit event; createTeam: 1 team + 1 membership +
      // 2 audit events — dal/invitations.ts and dal/teams.ts); nothing of the outage writes.
      expect(await counts()).toEqual({
        teams: before.teams + 1,
        memberships: before.memberships + 1,
        invitations: before.invitations + 1,
        audit: before.audit + 3,
      });
      expect(await admin.team.findMany({ where: { name: { in: ['During the outage', 'Cut mid-transaction'] } } })).toEqual([]);
      expect(await teamsWithoutLead()).toBe(0);
    } finally {
      warnings.mockRestore();
    }
  });
});

if (bins === null) {
  describe('PostgreSQL stopped briefly under a running app', () => {
    it.skip('skipped: PostgreSQL initdb/pg_ctl not found under /usr/lib/postgresql (install the postgresql package)', () => undefined);
  });
}

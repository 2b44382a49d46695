// Helpers for the authentication and authorization tests.
//
// `openAppDatabase()` points the app's own `db()` at a fresh migrated test database (by setting
// DATABASE_URL and resetting the cached environment), with a fixed test secret for sessions.
// `sessionFor(userId)` mints a session cookie exactly as next-auth does at sign-in (its own
// `encode`, our jwt callback's claims), and `contextFor(cookie)` makes a RequestContext that
// reads the user id back through next-auth's getServerSession, the production path, on every
// call. `call(ctx, fn)` runs an exported server action inside that context.

import { encode } from 'next-auth/jwt';
import type { Db } from '@/lib/server/db';
import { disconnectDb } from '@/lib/server/db';
import { resetEnvCache } from '@/lib/server/env';
import { hashPassword } from '@/lib/server/password';
import { resetAuthOptionsForTests } from '@/lib/server/auth/options';
import { sessionCookieName, sessionUserIdFromCookies } from '@/lib/server/auth/session';
import { runWithRequestContext, type RequestContext } from '@/lib/server/authz/context';
import { hashInvitationToken, newInvitationToken } from '@/lib/server/dal/invitations';
import { newTokenSecret } from '@/lib/server/tokens';
import { createTestDatabase, type TestDatabase } from './db-harness';

export const TEST_SECRET = 'test-only-secret-0123456789abcdefghijklmnopqrstuvwxyz';
export const SESSION_MAX_AGE_SECONDS = 8 * 3600;

export type AppDatabase = { t: TestDatabase; client: Db; close: () => Promise<void> };

export async function openAppDatabase(): Promise<AppDatabase> {
  const t = await createTestDatabase();
  await t.migrate();
  process.env.DATABASE_URL = t.url;
  process.env.NEXTAUTH_SECRET = TEST_SECRET;
  delete process.env.BORDERLINE_SESSION_HOURS;
  delete process.env.BORDERLINE_PROXY_HOPS;
  resetEnvCache();
  resetAuthOptionsForTests();
  return {
    t,
    client: t.client(),
    close: async () => {
      await disconnectDb();
      await t.drop();
    },
  };
}

/** A session cookie value as next-auth would set it after signing `userId` in at `issuedAt`. */
export async function sessionFor(
  userId: string,
  options: { secret?: string; issuedAt?: Date; maxAgeSeconds?: number } = {},
): Promise<string> {
  const authTime = Math.floor((options.issuedAt ?? new Date()).getTime() / 1000);
  return encode({
    token: { sub: userId, authTime },
    secret: options.secret ?? TEST_SECRET,
    maxAge: options.maxAgeSeconds ?? SESSION_MAX_AGE_SECONDS,
  });
}

export type ContextOptions = { address?: string; now?: Date };

/** A request from a browser holding `cookie` (or no cookie when null). */
export function contextFor(cookie: string | null, options: ContextOptions = {}): RequestContext {
  return {
    async sessionUserId() {
      if (cookie === null) return null;
      return sessionUserIdFromCookies({ [sessionCookieName(false)]: cookie });
    },
    async address() {
      return options.address ?? '198.51.100.7';
    },
    now() {
      return options.now ?? new Date();
    },
  };
}

export function call<T>(ctx: RequestContext, fn: () => Promise<T>): Promise<T> {
  return runWithRequestContext(ctx, fn);
}

let cachedHash: Promise<string> | null = null;
/** One real Argon2id hash reused for fixture users (password: FIXTURE_PASSWORD). */
export const FIXTURE_PASSWORD = 'tidal-walnut-parade-53';
export function fixtureHash(): Promise<string> {
  cachedHash ??= hashPassword(FIXTURE_PASSWORD);
  return cachedHash;
}

export type Fixture = {
  teamA: string;
  teamB: string;
  leadA: string;
  reviewerA: string;
  observerA: string;
  leadB: string;
  membershipLeadA: string;
  membershipReviewerA: string;
  membershipObserverA: string;
  projectA: string;
  projectB: string;
  /** Pending invitation of team A, with its secret. */
  invitationA: { id: string; token: string };
  /** Revoked invitation of team A. */
  revokedInvitationA: { id: string; token: string };
  /** Pipeline tokens (lib/server/tokens.ts): live ones of projects A and B, a revoked one of A. */
  tokenA: { id: string; secret: string };
  tokenB: { id: string; secret: string };
  revokedTokenA: { id: string; secret: string };
};

async function user(client: Db, email: string, name: string): Promise<string> {
  const u = await client.user.create({ data: { email, name, passwordHash: await fixtureHash() } });
  return u.id;
}

/**
 * Team A ("Pier Nine"): lead, reviewer, observer, one project, one pending and one revoked
 * invitation. Team B ("Dune Street"): its own lead and project. `tag` keeps the emails of
 * several fixtures in one database apart.
 */
export async function buildFixture(client: Db, now: Date = new Date(), tag = ''): Promise<Fixture> {
  const leadA = await user(client, `lead.a${tag}@pier-nine.example`, 'Ada Lead');
  const reviewerA = await user(client, `reviewer.a${tag}@pier-nine.example`, 'Rui Reviewer');
  const observerA = await user(client, `observer.a${tag}@pier-nine.example`, 'Oona Observer');
  const leadB = await user(client, `lead.b${tag}@dune-street.example`, 'Bo Lead');
  const teamA = (await client.team.create({ data: { name: `Pier Nine${tag}` } })).id;
  const teamB = (await client.team.create({ data: { name: `Dune Street${tag}` } })).id;
  const m = async (teamId: string, userId: string, role: string) =>
    (await client.membership.create({ data: { teamId, userId, role } })).id;
  const membershipLeadA = await m(teamA, leadA, 'lead');
  const membershipReviewerA = await m(teamA, reviewerA, 'reviewer');
  const membershipObserverA = await m(teamA, observerA, 'observer');
  await m(teamB, leadB, 'lead');
  const project = async (teamId: string, name: string) => {
    const p = await client.project.create({ data: { teamId, name, featureCount: 2, settings: '{}' } });
    await client.projectClass.createMany({
      data: [
        { projectId: p.id, name: 'left', position: 0 },
        { projectId: p.id, name: 'right', position: 1 },
      ],
    });
    return p.id;
  };
  const projectA = await project(teamA, 'Harbour buoys');
  const projectB = await project(teamB, 'Dune grasses');
  const invitation = async (revoked: boolean) => {
    const token = newInvitationToken();
    const inv = await client.invitation.create({
      data: {
        teamId: teamA,
        role: 'reviewer',
        tokenHash: hashInvitationToken(token),
        createdById: leadA,
        expiresAt: new Date(now.getTime() + 72 * 3600_000),
        revokedAt: revoked ? now : null,
      },
    });
    return { id: inv.id, token };
  };
  const invitationA = await invitation(false);
  const revokedInvitationA = await invitation(true);
  const pipelineToken = async (projectId: string, createdById: string, revoked: boolean) => {
    const { secret, prefix, hash } = newTokenSecret();
    const t = await client.pipelineToken.create({
      data: { projectId, name: revoked ? 'old ci' : 'ci', tokenHash: hash, prefix, createdById, revokedAt: revoked ? now : null },
    });
    return { id: t.id, secret };
  };
  const tokenA = await pipelineToken(projectA, leadA, false);
  const tokenB = await pipelineToken(projectB, leadB, false);
  const revokedTokenA = await pipelineToken(projectA, leadA, true);
  return {
    teamA,
    teamB,
    leadA,
    reviewerA,
    observerA,
    leadB,
    membershipLeadA,
    membershipReviewerA,
    membershipObserverA,
    projectA,
    projectB,
    invitationA,
    revokedInvitationA,
    tokenA,
    tokenB,
    revokedTokenA,
  };
}

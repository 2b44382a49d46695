/**
 * Pipeline tokens: project-scoped bearer secrets for scripts (the REST API under /api/v1).
 *
 * - The secret (`blp_` + 32 random bytes, base64url) is returned once, at creation; only its
 *   SHA-256 is stored, with the first 12 characters in clear to tell tokens apart.
 * - A token reaches exactly one project. Presented on another project's URL it is refused as
 *   "not found" (the same answer as a project that does not exist), so ids do not leak.
 * - A token acts for the lead who created it, re-checked on every call: once that person is no
 *   longer a lead of the project's team, the token stops working (403) until a lead makes a new
 *   one. Revoked tokens are refused (401). lastUsedAt is updated at most once a minute.
 */
import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
import { DATA_LIMITS, TOKEN_DISPLAY_CHARS, TOKEN_SECRET_PREFIX } from '../domain-data';
import { recordAudit } from './auth/audit';
import { conflict, notFound } from './authz/errors';
import type { TeamScope } from './authz/scope';
import { db, type Db } from './db';

/** How often lastUsedAt is refreshed (ms): a busy pipeline does not turn every read into a write. */
export const LAST_USED_GRANULARITY_MS = 60_000;

export function hashTokenSecret(secret: string): string {
  return createHash('sha256').update(secret, 'utf8').digest('hex');
}

export function newTokenSecret(): { secret: string; prefix: string; hash: string } {
  const secret = `${TOKEN_SECRET_PREFIX}${randomBytes(32).toString('base64url')}`;
  return { secret, prefix: secret.slice(0, TOKEN_DISPLAY_CHARS), hash: hashTokenSecret(secret) };
}

export type PipelineTokenView = {
  id: string;
  name: string;
  prefix: string;
  createdAt: Date;
  createdBy: string;
  lastUsedAt: Date | null;
  revokedAt: Date | null;
};

export type CreatedPipelineToken = PipelineTokenView & {
  /** Shown once; not stored. */
  secret: string;
};

type Actor = { userId: string; address?: string | null; now?: Date };

async function projectOf(client: Db, scope: TeamScope, projectId: string): Promise<{ id: string }> {
  const project = await client.project.findFirst({ where: { id: projectId, teamId: scope.teamId }, select: { id: true } });
  if (project === null) throw notFound();
  return project;
}

export async function createPipelineToken(
  scope: TeamScope,
  projectId: string,
  name: string,
  actor: Actor,
  client: Db = db(),
): Promise<CreatedPipelineToken> {
  const project = await projectOf(client, scope, projectId);
  const now = actor.now ?? new Date();
  const { secret, prefix, hash } = newTokenSecret();
  return client.$transaction(async (tx) => {
    const live = await tx.pipelineToken.count({ where: { projectId: project.id, revokedAt: null } });
    if (live >= DATA_LIMITS.tokensPerProject) {
      throw conflict(`This project already has ${live} active tokens. Revoke one before creating another.`);
    }
    const row = await tx.pipelineToken.create({
      data: { projectId: project.id, name, tokenHash: hash, prefix, createdById: actor.userId, createdAt: now },
      select: { id: true, name: true, prefix: true, createdAt: true, lastUsedAt: true, revokedAt: true, createdBy: { select: { name: true } } },
    });
    await recordAudit(tx, {
      action: 'token.created',
      teamId: scope.teamId,
      userId: actor.userId,
      targetType: 'pipeline-token',
      targetId: row.id,
      detail: { projectId: project.id, name, prefix },
      address: actor.address ?? null,
    });
    return { ...row, createdBy: row.createdBy.name, secret };
  });
}

export async function revokePipelineToken(scope: TeamScope, tokenId: string, actor: Actor, client: Db = db()): Promise<PipelineTokenView> {
  const token = await client.pipelineToken.findFirst({
    where: { id: tokenId, project: { teamId: scope.teamId } },
    select: { id: true, revokedAt: true, projectId: true },
  });
  if (token === null) throw notFound();
  const now = actor.now ?? new Date();
  return client.$transaction(async (tx) => {
    if (token.revokedAt === null) {
      await tx.pipelineToken.updateMany({ where: { id: token.id, revokedAt: null }, data: { revokedAt: now } });
      await recordAudit(tx, {
        action: 'token.revoked',
        teamId: scope.teamId,
        userId: actor.userId,
        targetType: 'pipeline-token',
        targetId: token.id,
        detail: { projectId: token.projectId },
        address: actor.address ?? null,
      });
    }
    const row = await tx.pipelineToken.findUniqueOrThrow({
      where: { id: token.id },
      select: { id: true, name: true, prefix: true, createdAt: true, lastUsedAt: true, revokedAt: true, createdBy: { select: { name: true } } },
    });
    return { ...row, createdBy: row.createdBy.name };
  });
}

export async function listPipelineTokens(scope: TeamScope, projectId: string, client: Db = db()): Promise<PipelineTokenView[]> {
  await projectOf(client, scope, projectId);
  const rows = await client.pipelineToken.findMany({
    where: { projectId },
    orderBy: [{ revokedAt: 'asc' }, { createdAt: 'desc' }],
    select: { id: true, name: true, prefix: true, createdAt: true, lastUsedAt: true, revokedAt: true, createdBy: { select: { name: true } } },
  });
  return rows.map((r) => ({ ...r, createdBy: r.createdBy.name }));
}

// ───────────────────────── authentication of API calls ─────────────────────────

export type TokenPrincipal = {
  tokenId: string;
  projectId: string;
  teamId: string;
  /** The lead the token acts for. */
  userId: string;
};

export type TokenAuthResult =
  | { ok: true; principal: TokenPrincipal }
  | { ok: false; status: 401 | 403 | 404; error: string };

export const TOKEN_MESSAGES = {
  missing: 'Send a pipeline token: Authorization: Bearer <token>.',
  invalid: 'The pipeline token is not valid.',
  revoked: 'This pipeline token was revoked.',
  creatorNoLongerLead: 'The lead who created this token is no longer a lead of the team. A lead must create a new token.',
} as const;

const BEARER = /^Bearer\s+(\S+)\s*$/i;

/**
 * Checks `Authorization: Bearer <secret>` for a call on `projectId`. Re-reads the token, its
 * project and its creator's membership from the database on every call.
 */
export async function authenticatePipelineToken(
  authorization: string | null,
  projectId: string,
  options: { client?: Db; now?: Date } = {},
): Promise<TokenAuthResult> {
  const client = options.client ?? db();
  const now = options.now ?? new Date();
  const m = authorization === null ? null : BEARER.exec(authorization);
  if (m === null) return { ok: false, status: 401, error: TOKEN_MESSAGES.missing };
  const secret = m[1];
  if (!secret.startsWith(TOKEN_SECRET_PREFIX) || secret.length > 256 || !/^[A-Za-z0-9_-]+$/.test(secret)) {
    return { ok: false, status: 401, error: TOKEN_MESSAGES.invalid };
  }
  const hash = hashTokenSecret(secret);
  const token = await client.pipelineToken.findUnique({
    where: { tokenHash: hash },
    select: { id: true, tokenHash: true, projectId: true, createdById: true, revokedAt: true, lastUsedAt: true, project: { select: { teamId: true } } },
  });
  // The lookup is by hash; compare again in constant time for good measure.
  if (token === null || !timingSafeEqual(Buffer.from(token.tokenHash, 'hex'), Buffer.from(hash, 'hex'))) {
    return { ok: false, status: 401, error: TOKEN_MESSAGES.invalid };
  }
  if (token.revokedAt !== null) return { ok: false, status: 401, error: TOKEN_MESSAGES.revoked };
  if (token.projectId !== projectId) return { ok: false, status: 404, error: 'Not found. It may have been removed, or you may not have access to it.' };
  const membership = await client.membership.findUnique({
    where: { teamId_userId: { teamId: token.project.teamId, userId: token.createdById } },
    select: { role: true },
  });
  if (membership === null || membership.role !== 'lead') {
    return { ok: false, status: 403, error: TOKEN_MESSAGES.creatorNoLongerLead };
  }
  if (token.lastUsedAt === null || now.getTime() - token.lastUsedAt.getTime() >= LAST_USED_GRANULARITY_MS) {
    await client.pipelineToken.update({ where: { id: token.id }, data: { lastUsedAt: now } });
  }
  return {
    ok: true,
    principal: {
      tokenId: token.id,
      projectId: token.projectId,
      teamId: token.project.teamId,
      userId: token.createdById,
    },
  };
}

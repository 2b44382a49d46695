/**
 * The one authorization path for server actions and route handlers.
 *
 *   defineAction({ name, input, role, resource }, handler)   team-scoped (most actions)
 *   defineSignedInAction({ name, input }, handler)           any signed-in user, no team resource
 *   definePublicAction({ name, input }, handler)             no session (setup, sign-up by link)
 *   defineRoute({ name, input, role, resource }, handler)    route handlers, same checks, JSON out
 *
 * Order of checks on every call (nothing is cached between calls):
 *   1. authenticate: the session token gives a user id; the user row must still exist  → 401
 *   2. validate the input with the shared zod schema                                      → 400 / 413
 *   3. resolve the resource to its team; the caller must be a member of that team,
 *      re-read from the database now — not from the token                                → 404
 *   4. the caller's role must reach the required role                                    → 403
 *   5. run the handler with a TeamScope for that team; expected refusals are ActionErrors → 4xx
 * Actions read the user, the resource's team and the membership in one statement (readCaller);
 * the outcome for every caller is the same as checking the steps one by one.
 * The database not answering at any step (stopped, restarting, connections refused or cut, SQLite
 * locked past its busy timeout; lib/server/db-outage.ts) → 503 with MESSAGES.unavailable and
 * `retryable: true` (routes add Retry-After); logged as one warning line. A handler's transaction
 * is rolled back by the database when its connection goes, so nothing is half-done.
 * Unexpected errors are logged on the server and answered with a generic message (500); no
 * message text or stack of an internal error reaches the client.
 */
import type { z } from 'zod';
import { roleAtLeast, isRole, type ActionFailure, type ActionResult, type Role } from '../../domain';
import { db, type Db } from '../db';
import { databaseOutage } from '../db-outage';
import { log } from '../log';
import { requestContext, type RequestContext } from './context';
import { ActionError, failure, failureHeaders, MESSAGES, unavailable } from './errors';
import { REGISTRY, type Access, type ActionName, type RouteName } from './registry';
import { readCaller, type CallerRecord, type ResourceRef } from './resources';
import { mintTeamScope, type TeamScope } from './scope';
import { traced } from '../trace';

export type TeamRequirement = 'member' | 'reviewer' | 'lead';

export type CallerUser = { id: string; name: string; email: string };

export type PublicCaller = { db: Db; address: string; now: Date; sessionUserId: string | null };
export type SignedInCaller = { db: Db; address: string; now: Date; user: CallerUser };
export type MemberCaller = SignedInCaller & {
  membership: { id: string; role: Role; teamId: string };
  scope: TeamScope;
};

const MINIMUM_ROLE: Record<TeamRequirement, Role> = { member: 'observer', reviewer: 'reviewer', lead: 'lead' };

// ───────────────────────── registry check at definition time ─────────────────────────

export function assertRegistered(name: string, kind: 'action' | 'route', access: Access): void {
  const entry = (REGISTRY as Record<string, { kind: string; access: string } | undefined>)[name];
  if (!entry) throw new Error(`authz: "${name}" is not in lib/server/authz/registry.ts`);
  if (entry.kind !== kind) throw new Error(`authz: "${name}" is registered as a ${entry.kind}, defined as a ${kind}`);
  if (entry.access !== access) {
    throw new Error(`authz: "${name}" is registered with access "${entry.access}" but defined with "${access}"`);
  }
}

// ───────────────────────── shared steps ─────────────────────────

/** Maps a zod error to 413 (a field over its length cap) or 400, with per-field messages. */
export function validationFailure(error: z.ZodError): ActionFailure {
  const fields: Record<string, string> = {};
  for (const issue of error.issues) {
    const path = issue.path.map(String).join('.') || '_';
    if (!(path in fields)) fields[path] = issue.message;
  }
  const tooBig = error.issues.find((i) => i.code === 'too_big');
  if (tooBig) return failure(413, tooBig.message, fields);
  const first = error.issues[0];
  const rootProblem = first && first.path.length === 0;
  return failure(400, rootProblem ? 'The request was not in the expected form.' : (first?.message ?? 'Invalid input.'), fields);
}

function prismaCode(error: unknown): string | null {
  if (typeof error !== 'object' || error === null || !('code' in error)) return null;
  const code = (error as { code: unknown }).code;
  return typeof code === 'string' && /^P\d{4}$/.test(code) ? code : null;
}

/** The last non-empty line of an error's message (Prisma puts the cause there). */
function causeLine(error: unknown): string {
  const message = error instanceof Error ? error.message : String(error);
  return message.trim().split('\n').filter((l) => l.trim() !== '').at(-1)?.trim() ?? '';
}

/** Turns anything a handler threw into a failure result; logs unexpected errors server-side. */
export function failureFromError(name: string, error: unknown): ActionFailure {
  if (error instanceof ActionError) return failure(error.status, error.message, error.fields);
  const outage = databaseOutage(error);
  if (outage !== null) {
    log.warn('database unavailable', { endpoint: name, outage, error: causeLine(error) });
    return unavailable();
  }
  const code = prismaCode(error);
  if (code === 'P2002' || code === 'P2034') return failure(409, MESSAGES.conflict);
  if (code === 'P2025') return failure(404, MESSAGES.notFound);
  console.error(`[action ${name}] unexpected error`, error);
  return failure(500, MESSAGES.fault);
}

async function authenticate(ctx: RequestContext, client: Db): Promise<CallerUser | null> {
  const id = await ctx.sessionUserId();
  if (!id) return null;
  return (await readCaller(client, id))?.user ?? null;
}

/** Steps 3 and 4 on a caller record read with the resource: membership of the owning team, then the role. */
function judgeMember(record: CallerRecord, requirement: TeamRequirement): { ok: true; membership: MemberCaller['membership'] } | { ok: false; failure: ActionFailure } {
  const m = record.membership;
  if (record.teamId === null || !m || !isRole(m.role)) return { ok: false, failure: failure(404, MESSAGES.notFound) };
  const needed = MINIMUM_ROLE[requirement];
  if (!roleAtLeast(m.role, needed)) {
    return { ok: false, failure: failure(403, MESSAGES.forbidden(requirement === 'reviewer' ? 'reviewer or lead' : 'lead')) };
  }
  return { ok: true, membership: { id: m.id, role: m.role, teamId: m.teamId } };
}

/** Steps 3 and 4: membership re-read from the database, then the role. */
export async function authorizeMember(
  client: Db,
  userId: string,
  ref: ResourceRef,
  requirement: TeamRequirement,
): Promise<{ ok: true; membership: MemberCaller['membership'] } | { ok: false; failure: ActionFailure }> {
  const record = await readCaller(client, userId, ref);
  if (!record) return { ok: false, failure: failure(404, MESSAGES.notFound) };
  return judgeMember(record, requirement);
}

async function guarded<T>(name: string, run: () => Promise<ActionResult<T>>): Promise<ActionResult<T>> {
  try {
    return await run();
  } catch (error) {
    return failureFromError(name, error);
  }
}

// ───────────────────────── server actions ─────────────────────────

export type ActionFn<T> = (input: unknown) => Promise<ActionResult<T>>;

export function defineAction<S extends z.ZodType, T>(
  spec: { name: ActionName; input: S; role: TeamRequirement; resource: (input: z.output<S>) => ResourceRef },
  handler: (input: z.output<S>, caller: MemberCaller) => Promise<T>,
): ActionFn<T> {
  assertRegistered(spec.name, 'action', spec.role);
  return (raw: unknown) =>
    guarded(spec.name, async () => {
      const ctx = requestContext();
      const client = db();
      // Validation is pure, so it runs first here; its result is reported only after the caller
      // is known (401 before 400, as on every path). A valid input lets steps 1, 3 and 4 share one
      // read: the user, the resource's team and the caller's membership in one statement.
      const parsed = spec.input.safeParse(raw);
      const sessionUserId = await ctx.sessionUserId();
      const record = sessionUserId ? await traced('authz.caller', () => readCaller(client, sessionUserId, parsed.success ? spec.resource(parsed.data) : undefined)) : null;
      if (!record) return failure(401, MESSAGES.unauthenticated);
      if (!parsed.success) return validationFailure(parsed.error);
      const input = parsed.data;
      const auth = judgeMember(record, spec.role);
      if (!auth.ok) return auth.failure;
      const caller: MemberCaller = {
        db: client,
        address: await ctx.address(),
        now: ctx.now(),
        user: record.user,
        membership: auth.membership,
        scope: mintTeamScope(auth.membership.teamId),
      };
      return { ok: true, data: await handler(input, caller) };
    });
}

export function defineSignedInAction<S extends z.ZodType, T>(
  spec: { name: ActionName; input: S },
  handler: (input: z.output<S>, caller: SignedInCaller) => Promise<T>,
): ActionFn<T> {
  assertRegistered(spec.name, 'action', 'signed-in');
  return (raw: unknown) =>
    guarded(spec.name, async () => {
      const ctx = requestContext();
      const client = db();
      const user = await authenticate(ctx, client);
      if (!user) return failure(401, MESSAGES.unauthenticated);
      const parsed = spec.input.safeParse(raw);
      if (!parsed.success) return validationFailure(parsed.error);
      const caller: SignedInCaller = { db: client, address: await ctx.address(), now: ctx.now(), user };
      return { ok: true, data: await handler(parsed.data, caller) };
    });
}

export function definePublicAction<S extends z.ZodType, T>(
  spec: { name: ActionName; input: S },
  handler: (input: z.output<S>, caller: PublicCaller) => Promise<T>,
): ActionFn<T> {
  assertRegistered(spec.name, 'action', 'public');
  return (raw: unknown) =>
    guarded(spec.name, async () => {
      const ctx = requestContext();
      const client = db();
      const parsed = spec.input.safeParse(raw);
      if (!parsed.success) return validationFailure(parsed.error);
      const caller: PublicCaller = {
        db: client,
        address: await ctx.address(),
        now: ctx.now(),
        sessionUserId: await ctx.sessionUserId(),
      };
      return { ok: true, data: await handler(parsed.data, caller) };
    });
}

// ───────────────────────── route handlers ─────────────────────────

export const DEFAULT_BODY_LIMIT_BYTES = 1_000_000;

type RouteParams = Record<string, string | string[] | undefined>;
export type RouteContext = { params: Promise<RouteParams> };

function json(status: number, body: unknown, extra: Record<string, string> = {}): Response {
  return new Response(JSON.stringify(body), {
    status,
    headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...extra },
  });
}

/** A failure as JSON: {error, fields?, retryable?}, with Retry-After when retryable. */
export function failureResponse(f: ActionFailure, extraHeaders: Record<string, string> = {}): Response {
  const body: { error: string; fields?: Record<string, string>; retryable?: true } = { error: f.error };
  if (f.fields) body.fields = f.fields;
  if (f.retryable) body.retryable = true;
  return json(f.status, body, { ...failureHeaders(f), ...extraHeaders });
}

/**
 * Defence in depth against cross-site requests riding on the session cookie (which is already
 * SameSite=Lax): a state-changing request whose Origin names another host is refused. Requests
 * without an Origin header (scripts, curl) are not browsers' cross-site requests and pass.
 */
export function isCrossSite(req: Request): boolean {
  if (req.method === 'GET' || req.method === 'HEAD' || req.method === 'OPTIONS') return false;
  const origin = req.headers.get('origin');
  if (!origin) return false;
  const host = req.headers.get('x-forwarded-host') ?? req.headers.get('host');
  if (!host) return false;
  try {
    return new URL(origin).host !== host.split(',')[0].trim();
  } catch {
    return true;
  }
}

async function readJsonBody(req: Request, limit: number): Promise<{ ok: true; value: unknown } | { ok: false; failure: ActionFailure }> {
  const declared = Number(req.headers.get('content-length') ?? '0');
  if (declared > limit) return { ok: false, failure: failure(413, `The request body is too large (at most ${limit} bytes).`) };
  const text = await req.text();
  if (Buffer.byteLength(text) > limit) return { ok: false, failure: failure(413, `The request body is too large (at most ${limit} bytes).`) };
  if (text.trim() === '') return { ok: true, value: {} };
  try {
    return { ok: true, value: JSON.parse(text) };
  } catch {
    return { ok: false, failure: failure(400, 'The request body is not valid JSON.') };
  }
}

/**
 * A route handler behind the same checks as defineAction. Input = route params merged with the
 * query string (GET, DELETE) or with the JSON body (other methods). The handler returns data
 * (sent as JSON, 200) or a Response of its own (e.g. a file download).
 */
export function defineRoute<S extends z.ZodType, T>(
  spec: {
    name: RouteName;
    input: S;
    role: TeamRequirement;
    resource: (input: z.output<S>) => ResourceRef;
    bodyLimitBytes?: number;
    /**
     * 'stream': the input is the route params merged with the query string for every method,
     * and the body is left unread for the handler (uploads streamed from `req.body`).
     */
    body?: 'json' | 'stream';
  },
  handler: (input: z.output<S>, caller: MemberCaller, req: Request) => Promise<T | Response>,
): (req: Request, context: RouteContext) => Promise<Response> {
  assertRegistered(spec.name, 'route', spec.role);
  return async (req, context) => {
    const result = await guarded<T | Response>(spec.name, async () => {
      const ctx = requestContext();
      const client = db();
      const user = await authenticate(ctx, client);
      if (!user) return failure(401, MESSAGES.unauthenticated);
      if (isCrossSite(req)) return failure(403, MESSAGES.crossSite);
      const params = (await context.params) ?? {};
      let raw: unknown;
      if (req.method === 'GET' || req.method === 'DELETE' || req.method === 'HEAD' || spec.body === 'stream') {
        raw = { ...Object.fromEntries(new URL(req.url).searchParams), ...params };
      } else {
        const body = await readJsonBody(req, spec.bodyLimitBytes ?? DEFAULT_BODY_LIMIT_BYTES);
        if (!body.ok) return body.failure;
        raw = body.value !== null && typeof body.value === 'object' && !Array.isArray(body.value) ? { ...body.value, ...params } : body.value;
      }
      const parsed = spec.input.safeParse(raw);
      if (!parsed.success) return validationFailure(parsed.error);
      const auth = await authorizeMember(client, user.id, spec.resource(parsed.data), spec.role);
      if (!auth.ok) return auth.failure;
      const caller: MemberCaller = {
        db: client,
        address: await ctx.address(),
        now: ctx.now(),
        user,
        membership: auth.membership,
        scope: mintTeamScope(auth.membership.teamId),
      };
      return { ok: true, data: await handler(parsed.data, caller, req) };
    });
    if (!result.ok) return failureResponse(result);
    return result.data instanceof Response ? result.data : json(200, result.data);
  };
}

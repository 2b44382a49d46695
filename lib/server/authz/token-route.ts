/**
 * The wrapper for pipeline API route handlers (/api/v1/...): the same shape of checks as
 * `defineRoute`, with a pipeline token instead of a session.
 *
 * Order of checks on every call (nothing cached between calls):
 *   1. an `Authorization: Bearer <token>` header must be present                       → 401
 *   2. validate route params + query string with the shared zod schema                 → 400
 *   3. the token is looked up by its hash and re-read: unknown or revoked               → 401
 *      a token of another project (or a project that does not exist)                    → 404
 *      its creator is no longer a lead of the project's team                            → 403
 *   4. run the handler with a TeamScope of the token's team and the token's project.
 * Errors are answered as by defineRoute: expected refusals with their message, a database outage
 * with 503 and Retry-After, anything else with a generic 500 and nothing internal. The request
 * body is left unread for the handler.
 */
import type { z } from 'zod';
import { db, type Db } from '../db';
import { authenticatePipelineToken, TOKEN_MESSAGES } from '../tokens';
import { requestContext } from './context';
import { assertRegistered, failureFromError, failureResponse, validationFailure, type RouteContext } from './define';
import type { RouteName } from './registry';
import { mintTeamScope, type TeamScope } from './scope';

export type TokenCaller = {
  db: Db;
  now: Date;
  address: string;
  tokenId: string;
  projectId: string;
  /** The lead the token acts for (recorded as the author of imports). */
  userId: string;
  scope: TeamScope;
};

function json(status: number, body: unknown, extra: Record<string, string> = {}): Response {
  return new Response(JSON.stringify(body), {
    status,
    headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...extra },
  });
}

export function defineTokenRoute<S extends z.ZodType<{ projectId: string }>, T>(
  spec: { name: RouteName; input: S },
  handler: (input: z.output<S>, caller: TokenCaller, req: Request) => Promise<T | Response>,
): (req: Request, context: RouteContext) => Promise<Response> {
  assertRegistered(spec.name, 'route', 'token');
  const challenge = { 'www-authenticate': 'Bearer realm="borderline"' };
  return async (req, context) => {
    try {
      const authorization = req.headers.get('authorization');
      if (authorization === null) return json(401, { error: TOKEN_MESSAGES.missing }, challenge);
      const params = (await context.params) ?? {};
      const raw = { ...Object.fromEntries(new URL(req.url).searchParams), ...params };
      const parsed = spec.input.safeParse(raw);
      if (!parsed.success) {
        const f = validationFailure(parsed.error);
        return json(f.status, f.fields ? { error: f.error, fields: f.fields } : { error: f.error });
      }
      const client = db();
      const ctx = requestContext();
      const now = ctx.now();
      const auth = await authenticatePipelineToken(authorization, parsed.data.projectId, { client, now });
      if (!auth.ok) return json(auth.status, { error: auth.error }, auth.status === 401 ? challenge : {});
      const caller: TokenCaller = {
        db: client,
        now,
        address: await ctx.address(),
        tokenId: auth.principal.tokenId,
        projectId: auth.principal.projectId,
        userId: auth.principal.userId,
        scope: mintTeamScope(auth.principal.teamId),
      };
      const data = await handler(parsed.data, caller, req);
      return data instanceof Response ? data : json(200, data);
    } catch (error) {
      return failureResponse(failureFromError(spec.name, error));
    }
  };
}

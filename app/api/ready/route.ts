import { RETRY_AFTER_SECONDS } from '@/lib/server/authz/errors';
import { readiness } from '@/lib/server/readiness';

// Read on every request: the answer is about this moment.
export const dynamic = 'force-dynamic';

/**
 * Readiness: 200 {ready: true, database, migrations, ms} when the database answers a trivial
 * query within 2 s and its migrations are current; otherwise 503 {ready: false, reason, message,
 * ms} with Retry-After. No session needed; reveals no team data. Liveness is /api/health.
 */
export async function GET(): Promise<Response> {
  const result = await readiness();
  const headers: Record<string, string> = { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' };
  if (!result.ready) headers['retry-after'] = String(RETRY_AFTER_SECONDS);
  return new Response(JSON.stringify(result), { status: result.ready ? 200 : 503, headers });
}

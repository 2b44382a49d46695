/**
 * Next.js start-up hook, on the Node.js server runtime: open the database connection pool (on
 * PostgreSQL, so the first burst of requests does not wait for new connections; lib/server/db.ts
 * warmDbPool), then start the in-process refit worker so queued fits (for example the first fit of
 * an imported project) run without waiting for a page visit.
 */
export async function register(): Promise<void> {
  if (process.env.NEXT_RUNTIME !== 'nodejs') return;
  const { db, warmDbPool } = await import('./lib/server/db');
  const { log } = await import('./lib/server/log');
  // A database that is down at start is not fatal here: readiness reports it, requests answer 503.
  await warmDbPool(db()).catch((error: unknown) => log.warn('could not open the database connections at start', { error: String(error) }));
  const { ensureFitWorker } = await import('./lib/server/fits');
  await ensureFitWorker();
}

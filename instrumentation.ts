/**
 * Next.js start-up hook: on the Node.js server runtime, start the in-process refit worker so queued
 * fits (for example the first fit of an imported project) run without waiting for a page visit.
 */
export async function register(): Promise<void> {
  if (process.env.NEXT_RUNTIME !== 'nodejs') return;
  const { ensureFitWorker } = await import('./lib/server/fits');
  await ensureFitWorker();
}

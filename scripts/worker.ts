// npm run worker — a background worker of the PostgreSQL job system (refits, imports).
// See lib/server/worker/main.ts and README "Running for a team".
import { log } from '../lib/server/log';
import { exitOnStartupError } from '../lib/server/startup';
import { startWorkerProcess } from '../lib/server/worker/main';

try {
  const worker = await startWorkerProcess();
  let stopping = false;
  const stop = (signal: string) => {
    if (stopping) return;
    stopping = true;
    log.info(`received ${signal}`, { worker: worker.workerId });
    worker.stop().then(
      () => process.exit(0),
      (e: unknown) => {
        log.error('worker did not stop cleanly', { error: e instanceof Error ? e.message : String(e) });
        process.exit(1);
      },
    );
  };
  process.on('SIGTERM', () => stop('SIGTERM'));
  process.on('SIGINT', () => stop('SIGINT'));
} catch (error) {
  if (error instanceof Error && error.message.startsWith('npm run worker')) {
    console.error(`worker: ${error.message}`);
    process.exit(1);
  }
  exitOnStartupError(error, 'worker');
}

// npm run worker — a background worker of the PostgreSQL job system (refits, imports).
// See lib/server/worker/main.ts and README "Running for a team".
import { exitOnStartupError } from '../lib/server/startup';
import { startWorkerProcess } from '../lib/server/worker/main';

try {
  const worker = await startWorkerProcess();
  let stopping = false;
  const stop = (signal: string) => {
    if (stopping) return;
    stopping = true;
    process.stdout.write(`${JSON.stringify({ time: new Date().toISOString(), level: 'info', msg: `received ${signal}`, worker: worker.workerId })}\n`);
    worker.stop().then(
      () => process.exit(0),
      (e: unknown) => {
        console.error(e);
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

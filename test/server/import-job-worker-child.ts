// Child process of import-job-crash.test.ts: an import worker of the job system (pg-boss in the
// worker role + startImportJobWorker), small statements and frequent progress so the parent can
// SIGKILL it while it writes. Logs JSON lines on stdout. Not a test file itself; relative imports
// (plain `node --import tsx`).

import { createDb } from '../../lib/server/db';
import { parseDatabaseUrl } from '../../lib/server/env';
import { startImportJobWorker } from '../../lib/server/import/job';
import { startJobSystem } from '../../lib/server/jobs/boss';

const [url, workerId] = process.argv.slice(2);
const db = createDb(parseDatabaseUrl(url));
const boss = await startJobSystem({ connectionString: url, role: 'worker' });
await startImportJobWorker({
  db,
  boss,
  workerId,
  lease: { heartbeatMs: 200, staleMs: 2000 },
  progressMs: 50,
  batchSize: 250,
  log: (msg, fields) => process.stdout.write(`${JSON.stringify({ msg, ...fields })}\n`),
});
process.stdout.write('worker ready\n');

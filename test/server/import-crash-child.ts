// Child process of import-crash.test.ts: imports a file and reports progress on stdout, one line
// per progress call ("progress <phase> <rows> <written>"), so the parent can kill it mid-write.
// Not a test file itself. Relative imports: it runs under plain `node --import tsx`.

import { createReadStream } from 'node:fs';
import { mintTeamScope } from '../../lib/server/authz/scope';
import { createDb } from '../../lib/server/db';
import { parseDatabaseUrl } from '../../lib/server/env';
import { importSamples } from '../../lib/server/import';

const [url, teamId, projectId, userId, file] = process.argv.slice(2);
const client = createDb(parseDatabaseUrl(url));
const outcome = await importSamples(
  mintTeamScope(teamId),
  projectId,
  { source: createReadStream(file), fileName: 'crash.csv', mode: 'insert', userId },
  {
    client,
    batchSize: 250,
    progressEveryMs: 0,
    onProgress: (p) => process.stdout.write(`progress ${p.phase} ${p.rows} ${p.written}\n`),
  },
);
process.stdout.write(`finished ${outcome.ok}\n`);
await client.$disconnect();

// Child process of import-job-crash.test.ts acting as an app instance: stages a file into an
// import batch (lib/server/import/staged.ts) at a slow, steady pace — like a client's upload — and
// reports each stored chunk on stdout ("staged <batchId>" first, then "stored <bytes> <chunks>"),
// so the parent can SIGKILL it mid-upload. Not a test file itself; relative imports (plain
// `node --import tsx`).

import { createReadStream } from 'node:fs';
import { setTimeout as sleep } from 'node:timers/promises';
import { mintTeamScope } from '../../lib/server/authz/scope';
import { createDb } from '../../lib/server/db';
import { parseDatabaseUrl } from '../../lib/server/env';
import { stageImport } from '../../lib/server/import/staged';

const [url, teamId, projectId, userId, file, chunkBytes] = process.argv.slice(2);
const client = createDb(parseDatabaseUrl(url));

/** The file at about 64 KB per 10 ms. */
async function* slowly(): AsyncGenerator<Uint8Array> {
  for await (const piece of createReadStream(file, { highWaterMark: 64 * 1024 })) {
    yield piece as Buffer;
    await sleep(10);
  }
}

let announced = false;
const staged = await stageImport(client, mintTeamScope(teamId), projectId, { fileName: 'crash.csv', mode: 'insert', address: null }, userId, slowly(), {
  chunkBytes: Number(chunkBytes),
  onStored: (bytes, chunks) => {
    if (!announced) {
      announced = true;
      process.stdout.write('first chunk stored\n');
    }
    process.stdout.write(`stored ${bytes} ${chunks}\n`);
  },
});
process.stdout.write(`finished ${staged.batchId}\n`);
await client.$disconnect();

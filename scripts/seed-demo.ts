// npm run db:seed                 create the demo team, users and project (once)
// npm run db:seed -- --reset      remove the demo team and users first, then create them again
// Applies pending migrations first. Writes the list of planted label errors to
// <BORDERLINE_DATA_DIR>/demo-planted.json (default ./data) for anyone checking the queue's finds.

import { mkdirSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { createDb } from '../lib/server/db';
import { DEMO_PROJECT, DEMO_TEAM_NAME, DEMO_USERS } from '../lib/server/demo/constants';
import { generateDemo } from '../lib/server/demo/generate';
import { seedDemo } from '../lib/server/demo/seed';
import { runInitialFit } from '../lib/server/fits';
import { databaseConfigFrom, exitOnStartupError, prepareDatabase } from '../lib/server/startup';

const reset = process.argv.includes('--reset');

try {
  const prepared = await prepareDatabase();
  for (const name of prepared.applied) console.log(`Applied migration ${name}`);
  const client = createDb(databaseConfigFrom());
  try {
    const started = Date.now();
    const dataset = generateDemo();
    const result = await seedDemo(client, { reset, dataset, log: (line) => console.log(line) });
    if (result.status === 'exists') {
      console.log(`The demo team "${DEMO_TEAM_NAME}" already exists in ${prepared.target}; nothing written (use --reset to recreate it).`);
    } else {
      const dataDir = resolve(process.env.BORDERLINE_DATA_DIR || './data');
      mkdirSync(dataDir, { recursive: true });
      writeFileSync(join(dataDir, 'demo-planted.json'), `${JSON.stringify(dataset.planted, null, 2)}\n`);
      console.log(
        `Seeded "${DEMO_TEAM_NAME}" / "${DEMO_PROJECT.name}" into ${prepared.target}: ${result.samples} samples, ` +
          `${dataset.classes.length} classes, ${result.planted} planted label errors (${Date.now() - started} ms).`,
      );
    }
    // The demo opens on a fitted boundary and a filled queue: fit the current revision now unless
    // the project already has a fit (idempotent, like the rest of the seed).
    const project = await client.project.findFirst({ where: { name: DEMO_PROJECT.name, team: { name: DEMO_TEAM_NAME } }, select: { id: true } });
    if (project) {
      const fitStarted = Date.now();
      const outcome = await runInitialFit(project.id, client);
      if (outcome) console.log(`Fitted the demo's current revision (${Date.now() - fitStarted} ms).`);
    }
    console.log('Demo sign-ins:');
    for (const u of DEMO_USERS) console.log(`  ${u.role.padEnd(8)}  ${u.email.padEnd(30)}  ${u.password}`);
  } finally {
    await client.$disconnect();
  }
} catch (error) {
  exitOnStartupError(error, 'db:seed');
}

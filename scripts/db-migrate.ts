// npm run db:migrate                   apply pending migrations to DATABASE_URL's database
// npm run db:migrate -- --status       list migrations and whether each is applied
// Option --migrations-dir <dir> uses another folder of migrations (tests use it).
// Failures print one line naming the cause and exit with status 1.

import { databaseStatus, exitOnStartupError, prepareDatabase } from '../lib/server/startup';

function option(name: string): string | undefined {
  const i = process.argv.indexOf(name);
  return i === -1 ? undefined : process.argv[i + 1];
}

const migrationsDir = option('--migrations-dir');
const quiet = process.argv.includes('--quiet');

try {
  if (process.argv.includes('--status')) {
    const status = await databaseStatus({ migrationsDir });
    console.log(`${status.target}${status.databaseExists ? '' : ' (file does not exist yet)'}:`);
    for (const e of status.entries) {
      console.log(`  ${e.state.padEnd(13)} ${e.name}${e.appliedAt ? `  (${e.appliedAt})` : ''}`);
    }
    const problems = status.entries.filter((e) => e.state === 'changed' || e.state === 'not-in-folder');
    if (problems.length > 0) process.exitCode = 1;
  } else {
    const result = await prepareDatabase({ migrationsDir, log: quiet ? undefined : (line) => console.log(line) });
    if (result.applied.length === 0) {
      if (!quiet) console.log(`${result.target} is up to date.`);
    } else {
      console.log(`Applied ${result.applied.length} migration(s) to ${result.target}: ${result.applied.join(', ')}`);
    }
  }
} catch (error) {
  exitOnStartupError(error, 'db:migrate');
}

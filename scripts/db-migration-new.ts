// npm run db:migration:new -- <name> [--empty]
// Writes prisma/migrations/{sqlite,postgresql}/NNNN_<name>/ (migration.sql + schema.prisma
// snapshot) from the change of prisma/schema.prisma since the last migration. See
// lib/server/migrate/create.ts.

import { CreateMigrationError, createMigration } from '../lib/server/migrate/create';
import { MigrationError } from '../lib/server/migrate/runner';

const args = process.argv.slice(2);
const empty = args.includes('--empty');
const name = args.filter((a) => !a.startsWith('--')).join('_');

try {
  const created = await createMigration(name, { empty });
  for (const c of created) {
    console.log(`Created ${c.dir}/migration.sql${c.statements ? '' : ' (empty: write the SQL by hand)'}`);
  }
  console.log('Review both files, then run `npm run db:migrate` and commit the two folders.');
} catch (error) {
  if (error instanceof CreateMigrationError || error instanceof MigrationError) {
    console.error(`db:migration:new: ${error.message}`);
    process.exit(1);
  }
  throw error;
}

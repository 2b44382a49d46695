#!/usr/bin/env node
// Generates the two Prisma clients (SQLite and PostgreSQL) from the one data model.
//
//   npm run db:generate            # regenerate only if prisma/schema.prisma (or Prisma) changed
//   npm run db:generate -- --force # regenerate regardless
//
// prisma/schema.prisma is the source (SQLite). prisma/schema.postgresql.prisma is derived from
// it (provider and output folder swapped; gitignored) by prisma/variants.mjs. Clients go to
// lib/server/generated/{sqlite,postgresql}/ (gitignored). A hash of the inputs is stamped in
// lib/server/generated/.inputs-hash so that repeated runs (before tests, before start) return at
// once when nothing changed.
//
// The Prisma CLI wants a native schema engine binary even for `generate`, which does not use it;
// it cannot be downloaded here, so PRISMA_SCHEMA_ENGINE_BINARY is pointed at an existing file.

import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { derivePostgresqlSchema } from '../prisma/variants.mjs';

const ROOT = dirname(dirname(fileURLToPath(import.meta.url)));
const SCHEMA = join(ROOT, 'prisma', 'schema.prisma');
const PG_SCHEMA = join(ROOT, 'prisma', 'schema.postgresql.prisma');
const OUT = join(ROOT, 'lib', 'server', 'generated');
const STAMP = join(OUT, '.inputs-hash');
/** Bump when this script's way of generating changes, to force one regeneration. */
const SCRIPT_VERSION = '1';

const force = process.argv.includes('--force');
const require = createRequire(import.meta.url);
const prismaPackageJson = require.resolve('prisma/package.json');
const prismaVersion = JSON.parse(readFileSync(prismaPackageJson, 'utf8')).version;
const prismaCli = join(dirname(prismaPackageJson), 'build', 'index.js');

const sqliteSchema = readFileSync(SCHEMA, 'utf8');
let pgSchema;
try {
  pgSchema = derivePostgresqlSchema(sqliteSchema);
} catch (error) {
  console.error(`db:generate: ${error instanceof Error ? error.message : String(error)}`);
  process.exit(1);
}
if (!existsSync(PG_SCHEMA) || readFileSync(PG_SCHEMA, 'utf8') !== pgSchema) {
  writeFileSync(PG_SCHEMA, pgSchema);
}

const hash = createHash('sha256')
  .update([SCRIPT_VERSION, prismaVersion, sqliteSchema, pgSchema].join('\0'))
  .digest('hex');
const outputsExist = ['sqlite', 'postgresql'].every((p) => existsSync(join(OUT, p, 'client.ts')));
if (!force && outputsExist && existsSync(STAMP) && readFileSync(STAMP, 'utf8').trim() === hash) {
  console.log('db:generate: Prisma clients are up to date.');
  process.exit(0);
}

const engineStandIn =
  process.env.PRISMA_SCHEMA_ENGINE_BINARY && existsSync(process.env.PRISMA_SCHEMA_ENGINE_BINARY)
    ? process.env.PRISMA_SCHEMA_ENGINE_BINARY
    : SCHEMA;

/** @param {string} schemaPath @returns {Promise<void>} */
function generate(schemaPath) {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, [prismaCli, 'generate', '--schema', schemaPath], {
      cwd: ROOT,
      env: {
        ...process.env,
        PRISMA_SCHEMA_ENGINE_BINARY: engineStandIn,
        PRISMA_HIDE_UPDATE_MESSAGE: '1',
        CHECKPOINT_DISABLE: '1',
      },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let output = '';
    child.stdout.on('data', (d) => (output += d));
    child.stderr.on('data', (d) => (output += d));
    child.on('error', reject);
    child.on('close', (code) => {
      if (code === 0) resolve();
      else reject(new Error(`prisma generate --schema ${schemaPath} exited with ${code}:\n${output.trim()}`));
    });
  });
}

const started = Date.now();
try {
  await Promise.all([generate(SCHEMA), generate(PG_SCHEMA)]);
} catch (error) {
  console.error(`db:generate: ${error instanceof Error ? error.message : String(error)}`);
  process.exit(1);
}
mkdirSync(OUT, { recursive: true });
writeFileSync(STAMP, `${hash}\n`);
console.log(
  `db:generate: generated the SQLite and PostgreSQL Prisma clients (Prisma ${prismaVersion}) in ${Date.now() - started} ms.`,
);

// Derives the PostgreSQL variant of prisma/schema.prisma.
//
// prisma/schema.prisma is the single source of the data model (SQLite is the default mode).
// The PostgreSQL variant differs only in the datasource provider and the generated client's
// output folder. Plain ESM JavaScript so that both scripts/prisma-generate.mjs (plain node) and
// the TypeScript migration tooling (lib/server/migrate) can import it; types in variants.d.mts.

const DATASOURCE_BLOCK = /datasource\s+db\s*\{[^}]*\}/;
const GENERATOR_BLOCK = /generator\s+client\s*\{[^}]*\}/;

/**
 * @param {string} sqliteSchema
 * @returns {string}
 */
export function derivePostgresqlSchema(sqliteSchema) {
  const datasource = sqliteSchema.match(DATASOURCE_BLOCK);
  if (!datasource || !/provider\s*=\s*"sqlite"/.test(datasource[0])) {
    throw new Error('prisma/schema.prisma: expected a `datasource db { provider = "sqlite" }` block');
  }
  const generator = sqliteSchema.match(GENERATOR_BLOCK);
  if (!generator || !/output\s*=\s*"\.\.\/lib\/server\/generated\/sqlite"/.test(generator[0])) {
    throw new Error(
      'prisma/schema.prisma: expected `generator client { output = "../lib/server/generated/sqlite" }`',
    );
  }
  const header =
    '// GENERATED from prisma/schema.prisma by scripts/prisma-generate.mjs — do not edit.\n' +
    '// Differs only in the datasource provider and the client output folder.\n\n';
  return (
    header +
    sqliteSchema
      .replace(DATASOURCE_BLOCK, (block) => block.replace(/provider\s*=\s*"sqlite"/, 'provider = "postgresql"'))
      .replace(GENERATOR_BLOCK, (block) =>
        block.replace(/output\s*=\s*"\.\.\/lib\/server\/generated\/sqlite"/, 'output   = "../lib/server/generated/postgresql"'),
      )
  );
}

/**
 * The schema text for a provider, from the text of prisma/schema.prisma.
 * @param {'sqlite' | 'postgresql'} provider
 * @param {string} sqliteSchema
 * @returns {string}
 */
export function schemaFor(provider, sqliteSchema) {
  return provider === 'sqlite' ? sqliteSchema : derivePostgresqlSchema(sqliteSchema);
}

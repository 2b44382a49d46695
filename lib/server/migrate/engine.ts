// Prisma's schema engine as WebAssembly (@prisma/schema-engine-wasm), driven through a driver
// adapter. Used by the migration tooling (generate a migration by diffing two schemas) and by
// the tests (compare a live database with prisma/schema.prisma). The runtime migration runner
// (runner.ts) does not need it.
//
// The Prisma CLI's own `migrate` commands want a native engine binary that cannot be downloaded
// here; the WebAssembly build in the npm package does the same diffing without it.

import { readFile } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { PrismaBetterSqlite3 } from '@prisma/adapter-better-sqlite3';
import { PrismaPg } from '@prisma/adapter-pg';
import {
  bindMigrationAwareSqlAdapterFactory,
  type SqlMigrationAwareDriverAdapterFactory,
} from '@prisma/driver-adapter-utils';
import type { SchemaEngine } from '@prisma/schema-engine-wasm/schema_engine_bg';
import pg from 'pg';
import type { DatabaseConfig } from '../env';
import { MIGRATIONS_TABLE } from './constants';

export type Provider = DatabaseConfig['provider'];
type EngineModule = typeof import('@prisma/schema-engine-wasm/schema_engine_bg');

const cache = globalThis as typeof globalThis & { __borderlineSchemaEngine?: Promise<EngineModule> };

/**
 * Loads and starts the WebAssembly module once per process. The package's own entry imports
 * the .wasm file as an ES module, which Node does not do; so the glue module is imported and the
 * binary instantiated here, then wired together the way that entry would.
 */
export function loadSchemaEngine(): Promise<EngineModule> {
  cache.__borderlineSchemaEngine ??= (async () => {
    const glue: EngineModule = await import('@prisma/schema-engine-wasm/schema_engine_bg');
    const require = createRequire(import.meta.url);
    const packageDir = dirname(require.resolve('@prisma/schema-engine-wasm'));
    const binary = await readFile(join(packageDir, 'schema_engine_bg.wasm'));
    const { instance } = await WebAssembly.instantiate(binary, { './schema_engine_bg.js': glue });
    glue.__wbg_set_wasm(instance.exports);
    const start = instance.exports.__wbindgen_start;
    if (typeof start !== 'function') throw new Error('schema engine: __wbindgen_start missing from the wasm module');
    start();
    return glue;
  })();
  return cache.__borderlineSchemaEngine;
}

const SCHEMA_FILE = 'schema.prisma';
const noFilters = { externalTables: [], externalEnums: [] };

async function withEngine<T>(
  schema: string,
  adapterFactory: SqlMigrationAwareDriverAdapterFactory,
  run: (engine: SchemaEngine) => Promise<T>,
): Promise<T> {
  const glue = await loadSchemaEngine();
  const engine = await glue.SchemaEngine.new(
    { datamodels: [[SCHEMA_FILE, schema]] },
    () => undefined,
    bindMigrationAwareSqlAdapterFactory(adapterFactory),
  );
  try {
    return await run(engine);
  } finally {
    engine.free();
  }
}

/**
 * The SQL that takes a database from schema `from` (null: empty database) to schema `to`, for
 * the provider named in the schemas' datasource. No database is touched: for a diff between two
 * datamodels the engine picks its SQL dialect from the schema, and the adapter it requires is a
 * throwaway in-memory SQLite. Returns '' when the schemas describe the same database.
 */
export async function diffSchemas(from: string | null, to: string): Promise<string> {
  const adapter = new PrismaBetterSqlite3({ url: ':memory:' });
  return withEngine(to, adapter, async (engine) => {
    const result = await engine.diff({
      from: from === null ? { tag: 'empty' } : { tag: 'schemaDatamodel', files: [{ path: SCHEMA_FILE, content: from }] },
      to: { tag: 'schemaDatamodel', files: [{ path: SCHEMA_FILE, content: to }] },
      script: true,
      exitCode: true,
      filters: noFilters,
    });
    return result.exitCode === 0 ? '' : (result.stdout ?? '');
  });
}

/**
 * node-postgres pool for the schema engine's introspection. The engine reads catalog columns of
 * PostgreSQL's internal one-byte type "char" (OID 18), which @prisma/adapter-pg 7.10 does not
 * map and rejects; node-postgres returns them as strings already, so their fields are reported
 * as text (OID 25) instead. Only for this tooling pool, never for the app's client.
 */
function introspectionPool(url: string): pg.Pool {
  const CHAR_OID = 18;
  const TEXT_OID = 25;
  const relabel = (result: unknown): unknown => {
    if (typeof result === 'object' && result !== null && 'fields' in result && Array.isArray(result.fields)) {
      for (const field of result.fields as { dataTypeID: number }[]) {
        if (field.dataTypeID === CHAR_OID) field.dataTypeID = TEXT_OID;
      }
    }
    return result;
  };
  const patch = (target: object & { query: unknown }): void => {
    const original = target.query;
    if (typeof original !== 'function') return;
    Object.defineProperty(target, 'query', {
      configurable: true,
      writable: true,
      value: (...args: unknown[]): unknown => {
        const out: unknown = Reflect.apply(original, target, args);
        return out instanceof Promise ? out.then(relabel) : out;
      },
    });
  };
  const pool = new pg.Pool({ connectionString: url, max: 2 });
  patch(pool);
  pool.on('connect', (client) => patch(client));
  return pool;
}

/**
 * The SQL that would take the live database to `schema` ('' when they match). The migration
 * runner's own bookkeeping table is left out of the comparison. Used by tests.
 */
export async function diffDatabaseToSchema(config: DatabaseConfig, schema: string): Promise<string> {
  let adapter: SqlMigrationAwareDriverAdapterFactory;
  let pool: pg.Pool | undefined;
  let external: string;
  if (config.provider === 'sqlite') {
    adapter = new PrismaBetterSqlite3({ url: config.file });
    external = MIGRATIONS_TABLE;
  } else {
    pool = introspectionPool(config.url);
    adapter = new PrismaPg(pool);
    external = `public.${MIGRATIONS_TABLE}`;
  }
  try {
    return await withEngine(schema, adapter, async (engine) => {
      const files = [{ path: SCHEMA_FILE, content: schema }];
      const result = await engine.diff({
        from: { tag: 'schemaDatasource', files, configDir: process.cwd() },
        to: { tag: 'schemaDatamodel', files },
        script: true,
        exitCode: true,
        filters: { externalTables: [external], externalEnums: [] },
      });
      return result.exitCode === 0 ? '' : (result.stdout ?? '');
    });
  } finally {
    await pool?.end();
  }
}

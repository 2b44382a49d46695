// Test databases for the server tests.
//
// SQLite by default; PostgreSQL when BORDERLINE_TEST_DATABASE=postgres (server from
// BORDERLINE_TEST_PG_URL, default postgresql://postgres@127.0.0.1:5432/test). Every call of
// `createTestDatabase()` gives a fresh, empty database of its own — a temporary SQLite file, or a
// uniquely named PostgreSQL database created on the server — and `drop()` removes it again.
//
//   const t = await createTestDatabase();
//   await t.migrate();                 // all migrations in prisma/migrations/<provider>
//   const db = t.client();             // Prisma client (same Db type as the app)
//   …
//   await t.drop();

import { cpSync, mkdtempSync, mkdirSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import pg from 'pg';
import { createDb, driverErrorMessage, type Db } from '@/lib/server/db';
import { parseDatabaseUrl, type DatabaseConfig } from '@/lib/server/env';
import { applyMigrations, defaultMigrationsDir, type MigrateOptions, type MigrateResult } from '@/lib/server/migrate/runner';

export type Provider = DatabaseConfig['provider'];

/** The provider the server tests run against. */
export const TEST_PROVIDER: Provider = process.env.BORDERLINE_TEST_DATABASE === 'postgres' ? 'postgresql' : 'sqlite';
if (!['postgres', 'sqlite', undefined, ''].includes(process.env.BORDERLINE_TEST_DATABASE)) {
  throw new Error(`BORDERLINE_TEST_DATABASE must be "postgres" or "sqlite", got "${process.env.BORDERLINE_TEST_DATABASE}"`);
}
export const TEST_PG_URL = process.env.BORDERLINE_TEST_PG_URL || 'postgresql://postgres@127.0.0.1:5432/test';

export type TestDatabase = {
  provider: Provider;
  url: string;
  config: DatabaseConfig;
  /** The Prisma client of this database (created on first call, closed by drop()). */
  client(): Db;
  /** Applies migrations (default: the repository's own). */
  migrate(options?: MigrateOptions): Promise<MigrateResult>;
  /** Disconnects and deletes the database. */
  drop(): Promise<void>;
};

function withDatabase(url: string, database: string): string {
  const u = new URL(url);
  u.pathname = `/${database}`;
  return u.toString();
}

async function adminQuery(sql: string): Promise<void> {
  const client = new pg.Client({ connectionString: TEST_PG_URL, connectionTimeoutMillis: 5000 });
  client.on('error', () => undefined);
  try {
    await client.connect();
  } catch (error) {
    const reason = error instanceof Error ? error.message : String(error);
    throw new Error(
      `PostgreSQL for the tests is not reachable at ${TEST_PG_URL} (${reason}). Start it ` +
        '(pg_ctlcluster --skip-systemctl-redirect $(ls /etc/postgresql) main start), set BORDERLINE_TEST_PG_URL, ' +
        'or unset BORDERLINE_TEST_DATABASE to test on SQLite.',
    );
  }
  try {
    await client.query(sql);
  } finally {
    await client.end().catch(() => undefined);
  }
}

let counter = 0;

/** A fresh, empty database of the given provider (default: TEST_PROVIDER). */
export async function createTestDatabase(provider: Provider = TEST_PROVIDER): Promise<TestDatabase> {
  let url: string;
  let cleanup: () => Promise<void>;
  if (provider === 'sqlite') {
    const dir = mkdtempSync(join(tmpdir(), 'borderline-test-'));
    url = `file:${join(dir, 'test.db')}`;
    cleanup = async () => rmSync(dir, { recursive: true, force: true });
  } else {
    counter += 1;
    const name = `borderline_test_${process.pid}_${counter}_${Math.random().toString(36).slice(2, 8)}`;
    await adminQuery(`CREATE DATABASE "${name}"`);
    url = withDatabase(TEST_PG_URL, name);
    cleanup = () => adminQuery(`DROP DATABASE IF EXISTS "${name}" WITH (FORCE)`);
  }
  const config = parseDatabaseUrl(url);
  let client: Db | undefined;
  return {
    provider,
    url,
    config,
    client() {
      client ??= createDb(config, { log: ['warn'] });
      return client;
    },
    migrate(options) {
      return applyMigrations(config, options);
    },
    async drop() {
      await client?.$disconnect();
      client = undefined;
      await cleanup();
    },
  };
}

/**
 * A temporary copy of the repository's migrations for `provider`, optionally only those up to
 * and including `upTo`, plus extra migrations. For tests that need a broken or edited folder.
 */
export function copyMigrations(
  provider: Provider,
  options: { upTo?: string; extra?: { name: string; sql: string }[] } = {},
): { dir: string; remove: () => void } {
  const root = mkdtempSync(join(tmpdir(), 'borderline-migrations-'));
  const dir = join(root, provider);
  mkdirSync(dir);
  const source = defaultMigrationsDir(provider);
  for (const name of readdirSync(source).sort()) {
    if (options.upTo !== undefined && name > options.upTo) continue;
    cpSync(join(source, name), join(dir, name), { recursive: true });
  }
  for (const m of options.extra ?? []) {
    mkdirSync(join(dir, m.name));
    writeFileSync(join(dir, m.name, 'migration.sql'), m.sql);
  }
  return { dir, remove: () => rmSync(root, { recursive: true, force: true }) };
}

export type Snapshot = { schema: string[]; data: Record<string, string[]> };

function cell(value: unknown): string {
  if (value instanceof Uint8Array) return `bytes:${Buffer.from(value).toString('hex')}`;
  if (value instanceof Date) return `date:${value.toISOString()}`;
  if (typeof value === 'bigint') return `int:${value}`;
  return JSON.stringify(value);
}

function rowKey(row: Record<string, unknown>): string {
  return Object.keys(row)
    .sort()
    .map((k) => `${k}=${cell(row[k])}`)
    .join('|');
}

/**
 * The whole database — schema objects (tables, columns, indexes, constraints, triggers,
 * functions) and every row of every table — in a form that compares equal exactly when nothing
 * changed. Read with the raw drivers, independent of Prisma.
 */
export async function snapshot(t: TestDatabase): Promise<Snapshot> {
  if (t.config.provider === 'sqlite') {
    const conn = new Database(t.config.file, { readonly: true });
    try {
      const objects = conn
        .prepare(`SELECT type, name, tbl_name, sql FROM sqlite_master WHERE name NOT LIKE 'sqlite_%' ORDER BY type, name`)
        .all() as { type: string; name: string; tbl_name: string; sql: string | null }[];
      const data: Record<string, string[]> = {};
      for (const o of objects.filter((x) => x.type === 'table')) {
        const rows = conn.prepare(`SELECT * FROM "${o.name}"`).all() as Record<string, unknown>[];
        data[o.name] = rows.map(rowKey).sort();
      }
      return { schema: objects.map((o) => `${o.type} ${o.name} ${o.tbl_name} ${o.sql ?? ''}`), data };
    } finally {
      conn.close();
    }
  }
  const client = new pg.Client({ connectionString: t.url });
  await client.connect();
  try {
    const q = async (sql: string): Promise<string[]> =>
      (await client.query(sql)).rows.map((r: Record<string, unknown>) => rowKey(r)).sort();
    const schema = [
      ...(await q(
        `SELECT table_name, column_name, data_type, is_nullable, column_default FROM information_schema.columns WHERE table_schema = 'public'`,
      )),
      ...(await q(`SELECT indexname, indexdef FROM pg_indexes WHERE schemaname = 'public'`)),
      ...(await q(
        `SELECT conname, contype, pg_get_constraintdef(c.oid) AS def FROM pg_constraint c JOIN pg_namespace n ON n.oid = c.connamespace WHERE n.nspname = 'public'`,
      )),
      ...(await q(`SELECT tgname, tgrelid::regclass::text AS rel FROM pg_trigger WHERE NOT tgisinternal`)),
      ...(await q(
        `SELECT proname FROM pg_proc p JOIN pg_namespace n ON n.oid = p.pronamespace WHERE n.nspname = 'public'`,
      )),
    ];
    const tables = (
      await client.query(`SELECT table_name FROM information_schema.tables WHERE table_schema = 'public' AND table_type = 'BASE TABLE'`)
    ).rows.map((r: { table_name: string }) => r.table_name);
    const data: Record<string, string[]> = {};
    for (const name of tables) data[name] = await q(`SELECT * FROM "${name}"`);
    return { schema, data };
  } finally {
    await client.end();
  }
}

/** Awaits a database call that must fail; returns the database's own message for the refusal. */
export async function refusal(call: Promise<unknown>): Promise<string> {
  try {
    await call;
  } catch (error) {
    return driverErrorMessage(error) ?? (error instanceof Error ? error.message : String(error));
  }
  throw new Error('expected the database to refuse the call, but it succeeded');
}

// The migration runner: applies the versioned SQL migrations in prisma/migrations/<provider>/.
//
// - Each migration folder NNNN_name/ holds migration.sql (and schema.prisma, the schema it
//   produces, used only to generate the next migration).
// - Applied migrations are recorded with a SHA-256 checksum of their SQL in `_borderline_migrations`.
//   The runner refuses to start if an applied migration was edited, is missing locally, or if a
//   migration would be applied out of order.
// - All pending migrations of a run are applied in ONE transaction (SQLite and PostgreSQL both
//   have transactional DDL): if any of them fails, nothing of the run stays and the database is
//   exactly as it was.
// - A lock keeps concurrent starters from racing: SQLite `BEGIN IMMEDIATE` (the write lock, with
//   a busy timeout to wait for it), PostgreSQL a transaction-scoped advisory lock. The applied
//   list is read only after the lock is held, so a second runner sees the first one's work.

import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readdirSync, readFileSync } from 'node:fs';
import { dirname, join, relative } from 'node:path';
import Database from 'better-sqlite3';
import pg from 'pg';
import type { DatabaseConfig } from '../env';
import { MIGRATION_LOCK_WAIT_MS, MIGRATION_NAME, MIGRATIONS_TABLE, PG_MIGRATION_LOCK_KEY } from './constants';

export type Provider = DatabaseConfig['provider'];

export type Migration = {
  /** Folder name, e.g. 0002_audit_append_only. */
  name: string;
  /** Folder path. */
  path: string;
  sql: string;
  checksum: string;
};

export type AppliedRecord = { name: string; checksum: string; appliedAt: string; executionMs: number };

export type MigrationErrorKind = 'failed' | 'changed' | 'unknown' | 'order' | 'invalid' | 'locked';

/** A migration problem; the message is one line meant for the operator. */
export class MigrationError extends Error {
  readonly kind: MigrationErrorKind;
  readonly migration: string | undefined;
  constructor(kind: MigrationErrorKind, message: string, migration?: string) {
    super(message);
    this.name = 'MigrationError';
    this.kind = kind;
    this.migration = migration;
  }
}

export type MigrateOptions = {
  /** Folder of migration folders (default: prisma/migrations/<provider> under `root`). */
  migrationsDir?: string;
  /** Repository root (default: the working directory). */
  root?: string;
  /** Progress lines. */
  log?: (line: string) => void;
};

export type MigrateResult = { provider: Provider; applied: string[]; migrationsDir: string };

export function defaultMigrationsDir(provider: Provider, root: string = process.cwd()): string {
  return join(root, 'prisma', 'migrations', provider);
}

/** SHA-256 (hex) of a migration's SQL, with CRLF line ends read as LF. */
export function checksumOf(sql: string): string {
  return createHash('sha256').update(sql.replace(/\r\n/g, '\n')).digest('hex');
}

function shown(path: string): string {
  const rel = relative(process.cwd(), path);
  return rel === '' ? '.' : rel.startsWith('..') ? path : rel;
}

// Statements that would end the runner's transaction early (and so break "all or nothing").
// Trigger and PL/pgSQL bodies use a bare BEGIN without a semicolon and are not matched.
const TRANSACTION_CONTROL =
  /^\s*(COMMIT|ROLLBACK|END\s+TRANSACTION|BEGIN\s*(DEFERRED|IMMEDIATE|EXCLUSIVE|TRANSACTION|WORK)?\s*;)/im;

function stripSqlComments(sql: string): string {
  return sql.replace(/--[^\n]*/g, '').replace(/\/\*[\s\S]*?\*\//g, '');
}

/** Reads and checks the migration folders of `dir`, in order. */
export function readMigrations(dir: string): Migration[] {
  if (!existsSync(dir)) {
    throw new MigrationError('invalid', `The migrations folder ${shown(dir)} does not exist.`);
  }
  const migrations: Migration[] = [];
  const seen = new Map<string, string>();
  const entries = readdirSync(dir, { withFileTypes: true })
    .filter((e) => e.isDirectory() && !e.name.startsWith('.'))
    .map((e) => e.name)
    .sort();
  for (const name of entries) {
    const match = MIGRATION_NAME.exec(name);
    if (match === null) {
      throw new MigrationError(
        'invalid',
        `Migration folder ${shown(join(dir, name))} is not named NNNN_lower_case_name.`,
        name,
      );
    }
    const other = seen.get(match[1]);
    if (other !== undefined) {
      throw new MigrationError('invalid', `Migrations ${other} and ${name} share the number ${match[1]}.`, name);
    }
    seen.set(match[1], name);
    const path = join(dir, name);
    const file = join(path, 'migration.sql');
    if (!existsSync(file)) {
      throw new MigrationError('invalid', `Migration ${name} has no migration.sql (${shown(file)}).`, name);
    }
    const sql = readFileSync(file, 'utf8');
    if (TRANSACTION_CONTROL.test(stripSqlComments(sql))) {
      throw new MigrationError(
        'invalid',
        `Migration ${name} contains a transaction statement (BEGIN/COMMIT/ROLLBACK); the runner wraps each run in one transaction.`,
        name,
      );
    }
    migrations.push({ name, path, sql, checksum: checksumOf(sql) });
  }
  return migrations;
}

/**
 * The migrations still to apply, after checking the applied history against the local folders:
 * every applied migration must exist locally with the same checksum, and none may be pending
 * before one that is applied.
 */
export function planMigrations(local: Migration[], applied: AppliedRecord[], migrationsDir: string): Migration[] {
  const byName = new Map(local.map((m) => [m.name, m]));
  for (const record of applied) {
    const m = byName.get(record.name);
    if (m === undefined) {
      throw new MigrationError(
        'unknown',
        `The database has migration ${record.name} applied, but ${shown(migrationsDir)} does not contain it; this database was migrated by a newer version of Borderline.`,
        record.name,
      );
    }
    if (m.checksum !== record.checksum) {
      throw new MigrationError(
        'changed',
        `Migration ${m.name} was edited after it was applied to this database (checksum differs); restore ${shown(join(m.path, 'migration.sql'))} and put changes in a new migration.`,
        m.name,
      );
    }
  }
  const appliedNames = new Set(applied.map((r) => r.name));
  const pending = local.filter((m) => !appliedNames.has(m.name));
  const lastApplied = applied.map((r) => r.name).sort().at(-1);
  if (lastApplied !== undefined && pending.length > 0 && pending[0].name < lastApplied) {
    throw new MigrationError(
      'order',
      `Migration ${pending[0].name} is not applied but the later migration ${lastApplied} is; migrations must be applied in order.`,
      pending[0].name,
    );
  }
  return pending;
}

function toRecord(row: unknown): AppliedRecord {
  if (typeof row !== 'object' || row === null) throw new Error(`${MIGRATIONS_TABLE}: unexpected row`);
  const r = row as Record<string, unknown>;
  return {
    name: String(r.name),
    checksum: String(r.checksum),
    appliedAt: String(r.applied_at),
    executionMs: Number(r.execution_ms),
  };
}

function reasonOf(error: unknown): string {
  const message = error instanceof Error ? error.message : String(error);
  return message.split('\n')[0].replace(/\.$/, '');
}

function failed(m: Migration, error: unknown): MigrationError {
  return new MigrationError(
    'failed',
    `Migration ${m.name} failed: ${reasonOf(error)}. Nothing from this run was applied; the database is as it was.`,
    m.name,
  );
}

const lockTimeout = (): MigrationError =>
  new MigrationError(
    'locked',
    `Timed out after ${MIGRATION_LOCK_WAIT_MS / 1000} s waiting for another process to finish applying migrations.`,
  );

// ───────────────────────── SQLite ─────────────────────────

const SQLITE_TABLE = `CREATE TABLE IF NOT EXISTS "${MIGRATIONS_TABLE}" (
  "name" TEXT NOT NULL PRIMARY KEY,
  "checksum" TEXT NOT NULL,
  "applied_at" TEXT NOT NULL,
  "execution_ms" INTEGER NOT NULL
)`;

function isBusy(error: unknown): boolean {
  return error instanceof Error && 'code' in error && typeof error.code === 'string' && error.code.startsWith('SQLITE_BUSY');
}

function applySqlite(file: string, local: Migration[], dir: string, log: (line: string) => void): string[] {
  mkdirSync(dirname(file), { recursive: true });
  const conn = new Database(file, { timeout: MIGRATION_LOCK_WAIT_MS });
  try {
    conn.pragma('journal_mode = WAL');
    // Table redefinitions (create new, copy, drop old, rename) must not fire ON DELETE actions;
    // foreign keys are checked explicitly before commit instead (SQLite's documented procedure
    // for schema changes; the pragma cannot change inside a transaction).
    conn.pragma('foreign_keys = OFF');
    try {
      conn.exec('BEGIN IMMEDIATE');
    } catch (error) {
      if (isBusy(error)) throw lockTimeout();
      throw error;
    }
    try {
      conn.exec(SQLITE_TABLE);
      const applied = conn
        .prepare(`SELECT "name", "checksum", "applied_at", "execution_ms" FROM "${MIGRATIONS_TABLE}" ORDER BY "name"`)
        .all()
        .map(toRecord);
      const pending = planMigrations(local, applied, dir);
      const insert = conn.prepare(
        `INSERT INTO "${MIGRATIONS_TABLE}" ("name", "checksum", "applied_at", "execution_ms") VALUES (?, ?, ?, ?)`,
      );
      for (const m of pending) {
        log(`Applying ${m.name} …`);
        const started = performance.now();
        try {
          conn.exec(m.sql);
        } catch (error) {
          throw failed(m, error);
        }
        const violations = conn.pragma('foreign_key_check');
        if (Array.isArray(violations) && violations.length > 0) {
          const first = toTable(violations[0]);
          throw failed(m, new Error(`it leaves ${violations.length} foreign key violation(s), first in table ${first}`));
        }
        insert.run(m.name, m.checksum, new Date().toISOString(), Math.round(performance.now() - started));
      }
      conn.exec('COMMIT');
      return pending.map((m) => m.name);
    } catch (error) {
      if (conn.inTransaction) conn.exec('ROLLBACK');
      throw error;
    }
  } finally {
    conn.close();
  }
}

function toTable(row: unknown): string {
  return typeof row === 'object' && row !== null && 'table' in row ? String(row.table) : '?';
}

function readAppliedSqlite(file: string): AppliedRecord[] | null {
  if (!existsSync(file)) return null;
  const conn = new Database(file, { readonly: true, fileMustExist: true, timeout: 5000 });
  try {
    const table = conn.prepare(`SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?`).get(MIGRATIONS_TABLE);
    if (table === undefined) return [];
    return conn
      .prepare(`SELECT "name", "checksum", "applied_at", "execution_ms" FROM "${MIGRATIONS_TABLE}" ORDER BY "name"`)
      .all()
      .map(toRecord);
  } finally {
    conn.close();
  }
}

// ───────────────────────── PostgreSQL ─────────────────────────

const PG_TABLE = `CREATE TABLE IF NOT EXISTS "${MIGRATIONS_TABLE}" (
  "name" TEXT NOT NULL PRIMARY KEY,
  "checksum" TEXT NOT NULL,
  "applied_at" TEXT NOT NULL,
  "execution_ms" INTEGER NOT NULL
)`;

async function connectPg(url: string): Promise<pg.Client> {
  const client = new pg.Client({ connectionString: url, connectionTimeoutMillis: 10_000 });
  // A server-side disconnect surfaces through the pending query; do not crash on the event.
  client.on('error', () => undefined);
  await client.connect();
  return client;
}

async function applyPostgres(url: string, local: Migration[], dir: string, log: (line: string) => void): Promise<string[]> {
  const client = await connectPg(url);
  try {
    await client.query('BEGIN');
    try {
      await client.query(`SET LOCAL lock_timeout = '${MIGRATION_LOCK_WAIT_MS}ms'`);
      try {
        await client.query('SELECT pg_advisory_xact_lock($1::bigint)', [PG_MIGRATION_LOCK_KEY.toString()]);
      } catch (error) {
        if (error instanceof Error && 'code' in error && error.code === '55P03') throw lockTimeout();
        throw error;
      }
      await client.query('SET LOCAL lock_timeout = DEFAULT');
      await client.query(PG_TABLE);
      const result = await client.query(
        `SELECT "name", "checksum", "applied_at", "execution_ms" FROM "${MIGRATIONS_TABLE}" ORDER BY "name"`,
      );
      const pending = planMigrations(local, result.rows.map(toRecord), dir);
      for (const m of pending) {
        log(`Applying ${m.name} …`);
        const started = performance.now();
        try {
          await client.query(m.sql);
        } catch (error) {
          throw failed(m, error);
        }
        await client.query(
          `INSERT INTO "${MIGRATIONS_TABLE}" ("name", "checksum", "applied_at", "execution_ms") VALUES ($1, $2, $3, $4)`,
          [m.name, m.checksum, new Date().toISOString(), Math.round(performance.now() - started)],
        );
      }
      await client.query('COMMIT');
      return pending.map((m) => m.name);
    } catch (error) {
      await client.query('ROLLBACK').catch(() => undefined);
      throw error;
    }
  } finally {
    await client.end().catch(() => undefined);
  }
}

async function readAppliedPostgres(url: string): Promise<AppliedRecord[]> {
  const client = await connectPg(url);
  try {
    const exists = await client.query('SELECT to_regclass($1) IS NOT NULL AS "exists"', [`"${MIGRATIONS_TABLE}"`]);
    if (exists.rows[0]?.exists !== true) return [];
    const result = await client.query(
      `SELECT "name", "checksum", "applied_at", "execution_ms" FROM "${MIGRATIONS_TABLE}" ORDER BY "name"`,
    );
    return result.rows.map(toRecord);
  } finally {
    await client.end().catch(() => undefined);
  }
}

// ───────────────────────── public API ─────────────────────────

/** Applies all pending migrations (one transaction, under the migration lock). */
export async function applyMigrations(config: DatabaseConfig, options: MigrateOptions = {}): Promise<MigrateResult> {
  const dir = options.migrationsDir ?? defaultMigrationsDir(config.provider, options.root);
  const log = options.log ?? (() => undefined);
  const local = readMigrations(dir);
  const applied =
    config.provider === 'sqlite'
      ? applySqlite(config.file, local, dir, log)
      : await applyPostgres(config.url, local, dir, log);
  return { provider: config.provider, applied, migrationsDir: dir };
}

export type MigrationState = 'applied' | 'pending' | 'changed' | 'not-in-folder';
export type MigrationStatusEntry = { name: string; state: MigrationState; appliedAt: string | null };
export type MigrationStatus = {
  provider: Provider;
  migrationsDir: string;
  /** False when the SQLite file does not exist yet. */
  databaseExists: boolean;
  entries: MigrationStatusEntry[];
};

/** Compares the local migrations with the database's record, without changing anything. */
export async function migrationStatus(config: DatabaseConfig, options: MigrateOptions = {}): Promise<MigrationStatus> {
  const dir = options.migrationsDir ?? defaultMigrationsDir(config.provider, options.root);
  const local = readMigrations(dir);
  const applied = config.provider === 'sqlite' ? readAppliedSqlite(config.file) : await readAppliedPostgres(config.url);
  const records = new Map((applied ?? []).map((r) => [r.name, r]));
  const entries: MigrationStatusEntry[] = local.map((m) => {
    const r = records.get(m.name);
    if (r === undefined) return { name: m.name, state: 'pending', appliedAt: null };
    return { name: m.name, state: r.checksum === m.checksum ? 'applied' : 'changed', appliedAt: r.appliedAt };
  });
  const localNames = new Set(local.map((m) => m.name));
  for (const r of applied ?? []) {
    if (!localNames.has(r.name)) entries.push({ name: r.name, state: 'not-in-folder', appliedAt: r.appliedAt });
  }
  entries.sort((a, b) => a.name.localeCompare(b.name));
  return { provider: config.provider, migrationsDir: dir, databaseExists: applied !== null, entries };
}

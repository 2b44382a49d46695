// Start-up checks for the database: used by `npm run db:migrate` and by the app's start.
//
// `prepareDatabase()` reads DATABASE_URL, checks that the database can be reached and written,
// and applies pending migrations. Every failure becomes ONE `StartupError` with a one-line
// message naming the cause (malformed URL, unreachable server, missing database, refused login,
// unwritable SQLite path, failed or edited migration); `exitOnStartupError` prints it without
// a stack trace and exits non-zero.

import { existsSync, mkdirSync, statSync } from 'node:fs';
import { dirname, relative } from 'node:path';
import Database from 'better-sqlite3';
import pg from 'pg';
import { ConfigError, DEFAULT_DATABASE_URL, parseDatabaseUrl, redactUrl, type DatabaseConfig } from './env';
import { applyMigrations, migrationStatus, MigrationError, type MigrationStatus } from './migrate/runner';

export type StartupFailure = 'config' | 'unreachable' | 'migration' | 'unexpected';

export class StartupError extends Error {
  readonly failure: StartupFailure;
  constructor(failure: StartupFailure, message: string) {
    super(message);
    this.name = 'StartupError';
    this.failure = failure;
  }
}

export type PrepareOptions = {
  /** Environment to read DATABASE_URL from (default: process.env). */
  env?: Record<string, string | undefined>;
  /** Repository root for relative paths (default: working directory). */
  root?: string;
  /** Folder of migrations (default: prisma/migrations/<provider>). */
  migrationsDir?: string;
  log?: (line: string) => void;
};

export type PrepareResult = {
  provider: DatabaseConfig['provider'];
  /** Human description of the database (no password). */
  target: string;
  applied: string[];
};

/** "SQLite data/borderline.db" or "PostgreSQL 127.0.0.1:5432/borderline". */
export function describeDatabase(config: DatabaseConfig, root: string = process.cwd()): string {
  if (config.provider === 'sqlite') {
    const rel = relative(root, config.file);
    return `SQLite ${rel.startsWith('..') ? config.file : rel}`;
  }
  return `PostgreSQL ${config.host}:${config.port}/${config.database}`;
}

/** Parses DATABASE_URL into a config or a StartupError naming the variable. */
export function databaseConfigFrom(
  source: Record<string, string | undefined> = process.env,
  root: string = process.cwd(),
): DatabaseConfig {
  const raw = source.DATABASE_URL;
  try {
    return parseDatabaseUrl(raw === undefined || raw.trim() === '' ? DEFAULT_DATABASE_URL : raw, root);
  } catch (error) {
    if (error instanceof ConfigError) throw new StartupError('config', `Invalid DATABASE_URL: ${error.message.replace(/^DATABASE_URL /, '')}.`);
    throw error;
  }
}

function errorCode(error: unknown): string | undefined {
  if (typeof error !== 'object' || error === null) return undefined;
  if ('code' in error && typeof error.code === 'string') return error.code;
  // Node's connection attempts to several addresses end in an AggregateError.
  if ('errors' in error && Array.isArray(error.errors)) return errorCode(error.errors[0]);
  return undefined;
}

function firstLine(error: unknown): string {
  const message = error instanceof Error ? error.message : String(error);
  return (message.split('\n')[0] || (error instanceof Error ? error.name : 'unknown error')).replace(/\.$/, '');
}

const FS_REASONS: Record<string, string> = {
  EACCES: 'permission denied',
  EPERM: 'operation not permitted',
  EROFS: 'read-only file system',
  ENOTDIR: 'a part of the path is a file, not a folder',
  EEXIST: 'a part of the path is a file, not a folder',
  ENOENT: 'no such file or folder',
  ENOSPC: 'no space left on the device',
};

const SQLITE_REASONS: Record<string, string> = {
  SQLITE_CANTOPEN: 'the file cannot be opened or created',
  SQLITE_READONLY: 'the file is read-only',
  SQLITE_NOTADB: 'the file is not a SQLite database',
  SQLITE_CORRUPT: 'the database file is corrupt',
  SQLITE_FULL: 'the disk is full',
  SQLITE_IOERR: 'an I/O error occurred',
  SQLITE_BUSY: 'another process holds the database locked',
};

function sqliteReason(error: unknown): string {
  const code = errorCode(error) ?? '';
  const base = Object.keys(SQLITE_REASONS).find((k) => code === k || code.startsWith(`${k}_`));
  if (base !== undefined) return SQLITE_REASONS[base];
  return FS_REASONS[code] ?? firstLine(error);
}

function checkSqlite(config: Extract<DatabaseConfig, { provider: 'sqlite' }>): void {
  const folder = dirname(config.file);
  try {
    mkdirSync(folder, { recursive: true });
  } catch (error) {
    const code = errorCode(error) ?? '';
    throw new StartupError(
      'unreachable',
      `Cannot create the folder ${folder} for the SQLite database (${FS_REASONS[code] ?? firstLine(error)}); check DATABASE_URL.`,
    );
  }
  if (existsSync(config.file) && statSync(config.file).isDirectory()) {
    throw new StartupError(
      'unreachable',
      `Cannot use the SQLite database ${config.file} (the path is a folder, not a file); check DATABASE_URL.`,
    );
  }
  let conn: Database.Database | undefined;
  try {
    conn = new Database(config.file, { timeout: 5000 });
    conn.prepare('SELECT count(*) FROM sqlite_master').get();
    conn.exec('BEGIN IMMEDIATE');
    conn.exec('ROLLBACK');
  } catch (error) {
    throw new StartupError(
      'unreachable',
      `Cannot use the SQLite database ${config.file} (${sqliteReason(error)}); check DATABASE_URL.`,
    );
  } finally {
    conn?.close();
  }
}

/** One-line description of a PostgreSQL connection failure. */
export function postgresFailureMessage(config: Extract<DatabaseConfig, { provider: 'postgresql' }>, error: unknown): string {
  const at = `${config.host}:${config.port}`;
  const code = errorCode(error);
  switch (code) {
    case 'ECONNREFUSED':
      return `Cannot reach PostgreSQL at ${at} (connection refused); check DATABASE_URL and that the server is running.`;
    case 'ENOTFOUND':
    case 'EAI_AGAIN':
      return `Cannot reach PostgreSQL at ${at} (host not found); check the host in DATABASE_URL.`;
    case 'ETIMEDOUT':
    case 'EHOSTUNREACH':
    case 'ENETUNREACH':
      return `Cannot reach PostgreSQL at ${at} (no route or timed out); check DATABASE_URL and the network.`;
    case '3D000':
      return `PostgreSQL at ${at} has no database "${config.database}"; create it (createdb ${config.database}) or fix DATABASE_URL.`;
    case '28P01':
    case '28000':
      return `PostgreSQL at ${at} refused the login of user "${config.user}" (${firstLine(error)}); check the user and password in DATABASE_URL.`;
    default:
      if (/timeout/i.test(firstLine(error))) {
        return `Cannot reach PostgreSQL at ${at} (connection timed out); check DATABASE_URL and that the server is running.`;
      }
      return `Cannot use PostgreSQL at ${at} (${firstLine(error)}); check DATABASE_URL.`;
  }
}

async function checkPostgres(config: Extract<DatabaseConfig, { provider: 'postgresql' }>): Promise<void> {
  const client = new pg.Client({ connectionString: config.url, connectionTimeoutMillis: 10_000 });
  client.on('error', () => undefined);
  try {
    await client.connect();
    await client.query('SELECT 1');
  } catch (error) {
    throw new StartupError('unreachable', postgresFailureMessage(config, error));
  } finally {
    await client.end().catch(() => undefined);
  }
}

/** Checks that the database can be reached (and, for SQLite, created and written). */
export async function checkDatabase(config: DatabaseConfig): Promise<void> {
  if (config.provider === 'sqlite') checkSqlite(config);
  else await checkPostgres(config);
}

function asStartupError(config: DatabaseConfig, error: unknown): StartupError {
  if (error instanceof StartupError) return error;
  if (error instanceof MigrationError) return new StartupError('migration', error.message);
  if (config.provider === 'postgresql' && errorCode(error) !== undefined && !/^[0-9A-Z]{5}$/.test(errorCode(error) ?? '')) {
    return new StartupError('unreachable', postgresFailureMessage(config, error));
  }
  if (config.provider === 'sqlite' && (errorCode(error) ?? '').startsWith('SQLITE_')) {
    return new StartupError('unreachable', `Cannot use the SQLite database ${config.file} (${sqliteReason(error)}); check DATABASE_URL.`);
  }
  return new StartupError('unexpected', `Unexpected database error: ${firstLine(error)}.`);
}

/**
 * Reads DATABASE_URL, checks the database and applies pending migrations. Throws StartupError
 * (one-line message) on any failure; a failed migration leaves the database as it was.
 */
export async function prepareDatabase(options: PrepareOptions = {}): Promise<PrepareResult> {
  const root = options.root ?? process.cwd();
  const config = databaseConfigFrom(options.env ?? process.env, root);
  try {
    await checkDatabase(config);
    const result = await applyMigrations(config, { migrationsDir: options.migrationsDir, root, log: options.log });
    return { provider: config.provider, target: describeDatabase(config, root), applied: result.applied };
  } catch (error) {
    throw asStartupError(config, error);
  }
}

/** The migration status of DATABASE_URL's database (no changes made). */
export async function databaseStatus(options: PrepareOptions = {}): Promise<MigrationStatus & { target: string }> {
  const root = options.root ?? process.cwd();
  const config = databaseConfigFrom(options.env ?? process.env, root);
  try {
    if (config.provider === 'postgresql') await checkPostgres(config);
    const status = await migrationStatus(config, { migrationsDir: options.migrationsDir, root });
    return { ...status, target: describeDatabase(config, root) };
  } catch (error) {
    throw asStartupError(config, error);
  }
}

/**
 * Prints a start-up failure as one line on stderr (no stack trace) and exits with status 1.
 * Set BORDERLINE_LOG_LEVEL=debug to also print the stack of unexpected errors.
 */
export function exitOnStartupError(error: unknown, prefix = 'borderline'): never {
  const message =
    error instanceof StartupError || error instanceof ConfigError || error instanceof MigrationError
      ? error.message
      : `Unexpected error: ${firstLine(error)}.`;
  console.error(`${prefix}: ${message}`);
  if (process.env.BORDERLINE_LOG_LEVEL === 'debug' && error instanceof Error && error.stack) console.error(error.stack);
  process.exit(1);
}

/** For the app's start: prepares the database or exits with one clear line. */
export async function prepareDatabaseOrExit(options: PrepareOptions = {}): Promise<PrepareResult> {
  try {
    return await prepareDatabase(options);
  } catch (error) {
    exitOnStartupError(error);
  }
}

export { redactUrl };

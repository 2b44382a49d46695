// The one checked view of the process environment (server side only; keep under lib/server).
//
// Call `env()` anywhere on the server: it validates process.env once, caches the result and
// throws ONE `ConfigError` whose message names the offending variable. Relative paths
// (DATABASE_URL=file:./…, BORDERLINE_DATA_DIR) resolve against the working directory, which the
// npm scripts and `next` set to the repository root.
//
// To add a variable: add one entry to `variables` below (with a default, or `.optional()`), and
// if it needs derived values or cross-checks, extend `derive()`. Document it in the README's
// configuration table.

import { randomBytes } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { isAbsolute, join, resolve } from 'node:path';
import { z } from 'zod';

export const LOG_LEVELS = ['debug', 'info', 'warn', 'error'] as const;
export type LogLevel = (typeof LOG_LEVELS)[number];

export const DEFAULT_DATABASE_URL = 'file:./data/borderline.db';

/** A whole number in [min, max]; `must` words the type error ("must be a whole number of hours"). */
function wholeNumber(must: string, [min, tooSmall]: [number, string], [max, tooLarge]: [number, string]) {
  return z.coerce.number({ error: must }).int({ error: must }).min(min, { error: tooSmall }).max(max, { error: tooLarge });
}

/** Every environment variable the server reads. Add new ones here. */
const variables = z.object({
  NODE_ENV: z
    .enum(['development', 'production', 'test'], { error: 'must be development, production or test' })
    .default('development'),
  /** file:<path> → embedded SQLite (default); postgresql://… or postgres://… → PostgreSQL. */
  DATABASE_URL: z.string().default(DEFAULT_DATABASE_URL),
  /** Signs session tokens. Required in production; generated into <data dir>/.secret otherwise. */
  NEXTAUTH_SECRET: z
    .string()
    .min(32, 'must be at least 32 characters (generate one with `openssl rand -base64 32`)')
    .optional(),
  /** Public base URL of the app. */
  NEXTAUTH_URL: z.url({ protocol: /^https?$/, error: 'must be an http:// or https:// URL' }).default(
    'http://localhost:3000',
  ),
  BORDERLINE_LOG_LEVEL: z
    .enum(LOG_LEVELS, { error: `must be one of ${LOG_LEVELS.join(', ')}` })
    .default('info'),
  /** Local state: uploads, the development secret, the demo's planted-error list. */
  BORDERLINE_DATA_DIR: z.string().min(1).default('./data'),
  /** Session lifetime in hours, counted from sign-in (not extended by activity). */
  BORDERLINE_SESSION_HOURS: wholeNumber('must be a whole number of hours', [1, 'must be at least 1 (hour)'], [168, 'must be at most 168 (one week)']).default(8),
  /** Reverse proxies in front of the app that append to X-Forwarded-For (sign-in throttling by address). */
  BORDERLINE_PROXY_HOPS: wholeNumber('must be a whole number', [0, 'must be 0 or more'], [5, 'must be at most 5']).default(0),
  /**
   * Where background work (refits, imports) runs. `auto`: in this process on SQLite, through the
   * PostgreSQL job system (pg-boss; `npm run worker` processes) on PostgreSQL. `in-process` keeps it
   * in the app process on PostgreSQL too (one app instance only); `job-system` needs PostgreSQL.
   */
  BORDERLINE_JOBS: z
    .enum(['auto', 'in-process', 'job-system'], { error: 'must be auto, in-process or job-system' })
    .default('auto'),
  /** A running fit whose worker has not given a sign of life for this long is run again elsewhere. */
  BORDERLINE_FIT_LEASE_SECONDS: wholeNumber('must be a whole number of seconds', [3, 'must be at least 3 (seconds)'], [3600, 'must be at most 3600 (one hour)']).default(30),
  /** Fits each `npm run worker` process runs at the same time. */
  BORDERLINE_WORKER_CONCURRENCY: wholeNumber('must be a whole number', [1, 'must be at least 1'], [16, 'must be at most 16']).default(1),
  /** A starting `npm run worker` reads the data of projects fitted within this many hours (0: none). */
  BORDERLINE_WORKER_WARM_HOURS: wholeNumber('must be a whole number of hours', [0, 'must be 0 or more'], [720, 'must be at most 720 (30 days)']).default(24),
});

export type RawEnv = z.infer<typeof variables>;

export type DatabaseConfig =
  | {
      provider: 'sqlite';
      /** The DATABASE_URL as given. */
      url: string;
      /** Absolute path of the database file. */
      file: string;
    }
  | {
      provider: 'postgresql';
      url: string;
      host: string;
      port: number;
      database: string;
      user: string;
    };

export type Env = Omit<RawEnv, 'NEXTAUTH_SECRET'> & {
  NEXTAUTH_SECRET: string;
  /** Where NEXTAUTH_SECRET came from. */
  secretSource: 'environment' | 'data-dir';
  /** Absolute BORDERLINE_DATA_DIR. */
  dataDir: string;
  database: DatabaseConfig;
  isProduction: boolean;
  /** BORDERLINE_JOBS resolved against the database. */
  jobs: 'in-process' | 'job-system';
};

/** A configuration problem. `variable` names the environment variable at fault. */
export class ConfigError extends Error {
  readonly variable: string;
  constructor(variable: string, problem: string) {
    super(`${variable} ${problem}`);
    this.name = 'ConfigError';
    this.variable = variable;
  }
}

/** Replaces a password in a URL by "***" so it can be shown in messages and logs. */
export function redactUrl(url: string): string {
  return url.replace(/^([a-z][a-z0-9+.-]*:\/\/[^:/@]*):[^@/]*@/i, '$1:***@');
}

/**
 * Reads a DATABASE_URL. `file:` → SQLite (relative paths against `root`), `postgres://` or
 * `postgresql://` → PostgreSQL. Anything else is a ConfigError naming DATABASE_URL.
 */
export function parseDatabaseUrl(url: string, root: string = process.cwd()): DatabaseConfig {
  const value = url.trim();
  const accepted =
    'expected file:<path> (embedded SQLite) or postgresql://user@host:5432/database (PostgreSQL)';
  if (value === '') throw new ConfigError('DATABASE_URL', `is empty; ${accepted}`);
  if (value.startsWith('file:')) {
    let path = value.slice('file:'.length).split('?')[0];
    if (path.startsWith('//')) path = path.slice(2); // file:///abs/path → /abs/path
    if (path === '') throw new ConfigError('DATABASE_URL', `names no file; ${accepted}`);
    if (path === ':memory:' || path.startsWith(':memory:')) {
      throw new ConfigError('DATABASE_URL', 'may not be an in-memory SQLite database; give a file path');
    }
    const file = isAbsolute(path) ? path : resolve(root, path);
    return { provider: 'sqlite', url: value, file };
  }
  if (/^postgres(ql)?:\/\//i.test(value)) {
    let parsed: URL;
    try {
      parsed = new URL(value);
    } catch {
      throw new ConfigError('DATABASE_URL', `is not a valid URL ("${redactUrl(value)}"); ${accepted}`);
    }
    const database = decodeURIComponent(parsed.pathname.replace(/^\//, ''));
    if (parsed.hostname === '') {
      throw new ConfigError('DATABASE_URL', `names no host ("${redactUrl(value)}"); ${accepted}`);
    }
    if (database === '' || database.includes('/')) {
      throw new ConfigError('DATABASE_URL', `names no database ("${redactUrl(value)}"); ${accepted}`);
    }
    return {
      provider: 'postgresql',
      url: value,
      host: parsed.hostname,
      port: parsed.port === '' ? 5432 : Number(parsed.port),
      database,
      user: decodeURIComponent(parsed.username) || 'postgres',
    };
  }
  const scheme = /^([a-z][a-z0-9+.-]*):/i.exec(value);
  const shown = scheme ? `a "${scheme[1]}:" URL` : 'a value without a scheme';
  throw new ConfigError('DATABASE_URL', `must start with "file:", "postgresql://" or "postgres://"; got ${shown}`);
}

/** Reads <dataDir>/.secret, creating it with a fresh random secret when missing. */
export function loadOrCreateLocalSecret(dataDir: string): string {
  const file = join(dataDir, '.secret');
  if (existsSync(file)) {
    const stored = readFileSync(file, 'utf8').trim();
    if (stored.length >= 32) return stored;
  }
  const secret = randomBytes(32).toString('base64url');
  try {
    mkdirSync(dataDir, { recursive: true });
    writeFileSync(file, `${secret}\n`, { mode: 0o600 });
  } catch (error) {
    const reason = error instanceof Error ? error.message : String(error);
    throw new ConfigError(
      'NEXTAUTH_SECRET',
      `is not set and the development secret could not be stored in ${file} (${reason})`,
    );
  }
  return secret;
}

function derive(raw: RawEnv, root: string): Env {
  const isProduction = raw.NODE_ENV === 'production';
  const dataDir = isAbsolute(raw.BORDERLINE_DATA_DIR) ? raw.BORDERLINE_DATA_DIR : resolve(root, raw.BORDERLINE_DATA_DIR);
  const database = parseDatabaseUrl(raw.DATABASE_URL, root);
  let secret = raw.NEXTAUTH_SECRET;
  let secretSource: Env['secretSource'] = 'environment';
  if (secret === undefined) {
    if (isProduction) {
      throw new ConfigError(
        'NEXTAUTH_SECRET',
        'is required when NODE_ENV=production (generate one with `openssl rand -base64 32`)',
      );
    }
    secret = loadOrCreateLocalSecret(dataDir);
    secretSource = 'data-dir';
  }
  if (raw.BORDERLINE_JOBS === 'job-system' && database.provider !== 'postgresql') {
    throw new ConfigError('BORDERLINE_JOBS', 'is job-system, which needs a PostgreSQL DATABASE_URL (the embedded database runs background work in-process)');
  }
  const jobs = raw.BORDERLINE_JOBS === 'auto' ? (database.provider === 'postgresql' ? 'job-system' : 'in-process') : raw.BORDERLINE_JOBS;
  return { ...raw, NEXTAUTH_SECRET: secret, secretSource, dataDir, database, isProduction, jobs };
}

/**
 * Validates an environment (default: process.env) without caching. Empty strings count as
 * unset. Throws one ConfigError naming the first offending variable.
 */
export function parseEnv(
  source: Record<string, string | undefined> = process.env,
  root: string = process.cwd(),
): Env {
  const present: Record<string, string> = {};
  for (const key of Object.keys(variables.shape)) {
    const value = source[key];
    if (value !== undefined && value.trim() !== '') present[key] = value;
  }
  const result = variables.safeParse(present);
  if (!result.success) {
    const issue = result.error.issues[0];
    const variable = String(issue.path[0] ?? 'environment');
    const shown = present[variable];
    const secretish = /SECRET|PASSWORD|TOKEN|KEY/i.test(variable);
    const got = shown === undefined || secretish ? '' : ` (got "${redactUrl(shown)}")`;
    throw new ConfigError(variable, `${issue.message}${got}`);
  }
  return derive(result.data, root);
}

const cache = globalThis as typeof globalThis & { __borderlineEnv?: Env };

/** The validated environment, checked once per process. */
export function env(): Env {
  if (cache.__borderlineEnv === undefined) cache.__borderlineEnv = parseEnv();
  return cache.__borderlineEnv;
}

/** Forget the cached environment (tests that change process.env). */
export function resetEnvCache(): void {
  cache.__borderlineEnv = undefined;
}

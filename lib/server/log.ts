// Structured server logs: one JSON object per line, {time, level, msg, ...fields}, debug and info
// on stdout, warn and error on stderr (so a process manager or container runtime can collect
// and filter them without parsing prose).
//
//   import { log } from '@/lib/server/log';
//   log.warn('database unavailable', { action: 'castVote', kind: 'refused' });
//   const jobLog = log.child({ worker: 'fit', pid: process.pid });
//   jobLog.info('job done', { jobId, ms });
//
// BORDERLINE_LOG_LEVEL (debug | info | warn | error, default info) drops lines below the level.
// The level is read straight from process.env with env.ts's list of levels instead of through
// env(): a logger must work when the rest of the environment is invalid (to report exactly that)
// and must not have env()'s side effects (creating the development secret). An unknown value
// counts as `info` here; env() refuses it with a clear message wherever it is checked.
//
// Deliberately a few dozen lines instead of a logging library (none is installed; this needs no
// transports, redaction rules or sampling). Error values in fields are written as
// {name, message, code?, stack?}; stacks stay in server logs and never reach a client.

import { LOG_LEVELS, type LogLevel } from './env';

export type LogFields = Record<string, unknown>;

export interface Logger {
  debug(msg: string, fields?: LogFields): void;
  info(msg: string, fields?: LogFields): void;
  warn(msg: string, fields?: LogFields): void;
  error(msg: string, fields?: LogFields): void;
  /** A logger that adds `fields` to every line (its own fields win over the parent's). */
  child(fields: LogFields): Logger;
}

export type LoggerOptions = {
  /** Minimum level (default: BORDERLINE_LOG_LEVEL, read on every line so tests can change it). */
  level?: LogLevel;
  /** Where lines go (default: stdout for debug/info, stderr for warn/error). */
  write?: (line: string, level: LogLevel) => void;
  /** The clock (tests). */
  now?: () => Date;
};

/** BORDERLINE_LOG_LEVEL as a level, `info` when unset or unknown. */
export function configuredLogLevel(source: Record<string, string | undefined> = process.env): LogLevel {
  const value = source.BORDERLINE_LOG_LEVEL?.trim();
  return (LOG_LEVELS as readonly string[]).includes(value ?? '') ? (value as LogLevel) : 'info';
}

function serialise(value: unknown): unknown {
  if (value instanceof Error) {
    const out: LogFields = { name: value.name, message: value.message };
    const code = (value as { code?: unknown }).code;
    if (typeof code === 'string' || typeof code === 'number') out.code = code;
    if (value.stack) out.stack = value.stack;
    return out;
  }
  return typeof value === 'bigint' ? value.toString() : value;
}

/** One line of JSON; never throws (a field that cannot be written is replaced by its String()). */
export function formatLine(time: Date, level: LogLevel, msg: string, fields: LogFields): string {
  const entry: LogFields = { time: time.toISOString(), level, msg };
  for (const [key, value] of Object.entries(fields)) if (!(key in entry)) entry[key] = value;
  try {
    return JSON.stringify(entry, (_key, value: unknown) => serialise(value));
  } catch {
    const safe: LogFields = {};
    for (const [key, value] of Object.entries(entry)) safe[key] = typeof value === 'string' ? value : String(value);
    return JSON.stringify(safe);
  }
}

function defaultWrite(line: string, level: LogLevel): void {
  (level === 'warn' || level === 'error' ? process.stderr : process.stdout).write(`${line}\n`);
}

export function createLogger(base: LogFields = {}, options: LoggerOptions = {}): Logger {
  const write = options.write ?? defaultWrite;
  const now = options.now ?? (() => new Date());
  const at = (level: LogLevel) => (msg: string, fields: LogFields = {}) => {
    const min = options.level ?? configuredLogLevel();
    if (LOG_LEVELS.indexOf(level) < LOG_LEVELS.indexOf(min)) return;
    write(formatLine(now(), level, msg, { ...base, ...fields }), level);
  };
  return {
    debug: at('debug'),
    info: at('info'),
    warn: at('warn'),
    error: at('error'),
    child: (fields) => createLogger({ ...base, ...fields }, options),
  };
}

/** The process-wide logger. */
export const log: Logger = createLogger();

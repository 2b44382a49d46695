// Is this error "the database is not answering" (retry later) rather than a fault in our code?
//
// `databaseOutage(error)` names the kind of outage or returns null. It looks through the shapes
// these reach us in, found by stopping a private PostgreSQL cluster under the app (see
// test/fault/pg-outage.test.ts) and by holding SQLite's write lock:
//
//   PostgreSQL stopped, connection refused   Prisma P1001 (driver adapter kind DatabaseNotReachable,
//                                            from ECONNREFUSED / ENOTFOUND); raw queries: P2010 with
//                                            the same driver adapter error
//   pooled connection killed by the shutdown Prisma P2039 with the driver adapter's PostgreSQL
//                                            code 57P01 (also 57P02 crash, 57P03 starting up)
//   connection lost inside a transaction     a plain Error from node-postgres: "Client has
//                                            encountered a connection error and is not queryable",
//                                            "Connection terminated unexpectedly"
//   no connection within the pool's timeout  pg-pool: "timeout exceeded when trying to connect",
//                                            "Connection terminated due to connection timeout"
//   socket reset / timed out                 P1017 (ConnectionClosed, ECONNRESET), P1008
//                                            (SocketTimeout, ETIMEDOUT)
//   SQLite write lock held past busy_timeout P1008 with the adapter's original code SQLITE_BUSY*
//   transaction not started within maxWait   P2028 "Unable to start a transaction in the given time"
//   too many connections                     P2037 / PostgreSQL 53300
//
// Class 08 (connection exception) SQLSTATEs count too. Anything else (constraint violations,
// missing tables, bugs) is not an outage and stays a 500 with a logged stack.

export type OutageKind = 'refused' | 'closed' | 'timeout' | 'shutdown' | 'busy';

const PRISMA_CODES: Record<string, OutageKind> = {
  P1001: 'refused', // can't reach database server
  P1002: 'timeout', // reached but timed out
  P1008: 'timeout', // operation timed out (SQLite busy is refined to 'busy' below)
  P1017: 'closed', // server has closed the connection
  P2037: 'busy', // too many connections
};

const DRIVER_KINDS: Record<string, OutageKind> = {
  DatabaseNotReachable: 'refused',
  ConnectionClosed: 'closed',
  SocketTimeout: 'timeout',
  TooManyConnections: 'busy',
};

/** SQLSTATE codes: admin/crash shutdown, cannot connect now, too many connections, class 08. */
function sqlStateKind(code: string): OutageKind | null {
  if (code === '57P01' || code === '57P02' || code === '57P03') return 'shutdown';
  if (code === '53300') return 'busy';
  if (/^08[0-9A-Z]{3}$/.test(code) && code !== '08P01') return 'closed'; // 08P01 is a protocol violation (a bug)
  return null;
}

const SOCKET_CODES: Record<string, OutageKind> = {
  ECONNREFUSED: 'refused',
  ENOTFOUND: 'refused',
  EAI_AGAIN: 'refused',
  EHOSTUNREACH: 'refused',
  ENETUNREACH: 'refused',
  ECONNRESET: 'closed',
  EPIPE: 'closed',
  ETIMEDOUT: 'timeout',
};

// node-postgres and pg-pool throw these as plain Errors (no code); the driver adapter passes them on.
const DRIVER_MESSAGES: [RegExp, OutageKind][] = [
  [/^Connection terminated( unexpectedly| due to connection timeout)?$/, 'closed'],
  [/^Client has encountered a connection error and is not queryable$/, 'closed'],
  [/^timeout exceeded when trying to connect$/, 'timeout'],
  [/^Query read timeout$/, 'timeout'],
  [/Unable to start a transaction in the given time/, 'busy'],
];

function field(value: unknown, key: string): unknown {
  return typeof value === 'object' && value !== null && key in value ? (value as Record<string, unknown>)[key] : undefined;
}

function str(value: unknown): string | undefined {
  return typeof value === 'string' ? value : undefined;
}

/** The driver adapter's error behind a Prisma error, when there is one. */
function driverCause(error: unknown): unknown {
  return field(field(field(error, 'meta'), 'driverAdapterError'), 'cause') ?? field(error, 'cause');
}

function kindOfDriverCause(cause: unknown): OutageKind | null {
  const kind = str(field(cause, 'kind'));
  const original = str(field(cause, 'originalCode')) ?? '';
  if (original.startsWith('SQLITE_BUSY') || original.startsWith('SQLITE_LOCKED')) return 'busy';
  if (kind !== undefined && kind in DRIVER_KINDS) return DRIVER_KINDS[kind];
  const sqlState = str(field(cause, 'code')) ?? original;
  return sqlState ? sqlStateKind(sqlState) : null;
}

function kindOf(error: unknown, depth: number): OutageKind | null {
  if (typeof error !== 'object' || error === null || depth > 4) return null;
  const code = str(field(error, 'code')) ?? str(field(error, 'errorCode'));
  const fromCause = kindOfDriverCause(driverCause(error));
  if (fromCause !== null) return fromCause;
  if (code !== undefined) {
    if (code in PRISMA_CODES) return PRISMA_CODES[code];
    if (code in SOCKET_CODES) return SOCKET_CODES[code];
    if (code.startsWith('SQLITE_BUSY') || code.startsWith('SQLITE_LOCKED')) return 'busy';
    const state = sqlStateKind(code);
    if (state !== null) return state;
  }
  if (code === undefined || code === 'P2028') {
    const message = str(field(error, 'message')) ?? '';
    const lastLine = message.trim().split('\n').at(-1)?.trim() ?? '';
    for (const [pattern, kind] of DRIVER_MESSAGES) if (pattern.test(lastLine) || pattern.test(message)) return kind;
  }
  // Node's connection attempts to several addresses end in an AggregateError; pg-pool wraps causes.
  const errors = field(error, 'errors');
  if (Array.isArray(errors)) for (const e of errors) {
    const k = kindOf(e, depth + 1);
    if (k !== null) return k;
  }
  const cause = field(error, 'cause');
  return cause !== undefined && cause !== error ? kindOf(cause, depth + 1) : null;
}

/** The kind of database outage behind `error`, or null when it is something else. */
export function databaseOutage(error: unknown): OutageKind | null {
  if (error instanceof DatabaseOutageError) return error.outage;
  return kindOf(error, 0);
}

/** An outage met in another thread (the import thread), passed on by its kind. */
export class DatabaseOutageError extends Error {
  constructor(readonly outage: OutageKind, message: string) {
    super(message);
    this.name = 'DatabaseOutageError';
  }
}

/** Thrown (or returned) when the database did not answer in time; `databaseOutage` says 'timeout'. */
export class DatabaseTimeoutError extends Error {
  readonly code = 'ETIMEDOUT';
  constructor(what: string, ms: number) {
    super(`${what} did not answer within ${ms} ms`);
    this.name = 'DatabaseTimeoutError';
  }
}

// Which errors count as "the database is not answering" (lib/server/db-outage.ts), and what the
// wrappers answer for them. The error shapes below were recorded from Prisma 7.10.0 with
// @prisma/adapter-pg 7.10.0 (node-postgres 8.23.1) while stopping a private PostgreSQL 15
// cluster under a live client, and from @prisma/adapter-better-sqlite3 with SQLite's write lock
// held (see test/fault/pg-outage.test.ts and sqlite-busy.test.ts for the live versions).
import { describe, expect, it, vi } from 'vitest';
import { failureFromError, failureResponse } from '@/lib/server/authz/define';
import { ActionError, MESSAGES, RETRY_AFTER_SECONDS } from '@/lib/server/authz/errors';
import { databaseOutage, DatabaseTimeoutError } from '@/lib/server/db-outage';

/** A Prisma known request error as the client throws it (code + meta.driverAdapterError.cause). */
function prismaError(code: string, message: string, cause?: Record<string, unknown>) {
  return Object.assign(new Error(message), {
    name: 'PrismaClientKnownRequestError',
    code,
    clientVersion: '7.10.0',
    meta: cause ? { driverAdapterError: { name: 'DriverAdapterError', cause } } : {},
  });
}

const RECORDED = {
  // The first query after `pg_ctl stop -m fast` on a pooled connection the shutdown killed.
  adminShutdown: prismaError('P2039', 'Database error. Code: `57P01`. Message: `terminating connection due to administrator command`', {
    originalCode: '57P01',
    originalMessage: 'terminating connection due to administrator command',
    kind: 'postgres',
    code: '57P01',
    severity: 'FATAL',
  }),
  // Every query while the server is down (new connections refused).
  refused: prismaError('P1001', "Can't reach database server at 127.0.0.1:42723", { kind: 'DatabaseNotReachable', host: '127.0.0.1', port: 42723 }),
  // $queryRaw while the server is down.
  refusedRaw: prismaError('P2010', "Raw query failed. Code: `N/A`. Message: `Can't reach database server at 127.0.0.1:42723`", {
    kind: 'DatabaseNotReachable',
    host: '127.0.0.1',
    port: 42723,
  }),
  // An interactive transaction whose connection the shutdown cut: node-postgres' own Error.
  cutInTransaction: Object.assign(new Error('Client has encountered a connection error and is not queryable'), { clientVersion: '7.10.0' }),
  // SQLite write lock held by another connection past busy_timeout.
  sqliteBusy: prismaError('P1008', 'Operation has timed out', { originalCode: 'SQLITE_BUSY', originalMessage: 'database is locked', kind: 'SocketTimeout' }),
};

describe('databaseOutage: what counts as the database not answering', () => {
  it('recognises the recorded PostgreSQL and SQLite outage errors', () => {
    expect(databaseOutage(RECORDED.adminShutdown)).toBe('shutdown');
    expect(databaseOutage(RECORDED.refused)).toBe('refused');
    expect(databaseOutage(RECORDED.refusedRaw)).toBe('refused');
    expect(databaseOutage(RECORDED.cutInTransaction)).toBe('closed');
    expect(databaseOutage(RECORDED.sqliteBusy)).toBe('busy');
  });

  it('recognises the SQLSTATEs, socket codes and driver messages of connection loss', () => {
    // SQLSTATEs from the PostgreSQL manual, Appendix A (class 08, 57P01–57P03, 53300).
    for (const code of ['57P01', '57P02', '57P03']) expect(databaseOutage(Object.assign(new Error('x'), { code, severity: 'FATAL' }))).toBe('shutdown');
    for (const code of ['08000', '08001', '08003', '08006']) expect(databaseOutage(Object.assign(new Error('x'), { code }))).toBe('closed');
    expect(databaseOutage(Object.assign(new Error('sorry, too many clients already'), { code: '53300' }))).toBe('busy');
    // Node's socket errors (code + syscall), as node-postgres passes them on.
    expect(databaseOutage(Object.assign(new Error('connect ECONNREFUSED 127.0.0.1:5432'), { code: 'ECONNREFUSED', syscall: 'connect', errno: -111 }))).toBe('refused');
    expect(databaseOutage(Object.assign(new Error('read ECONNRESET'), { code: 'ECONNRESET', syscall: 'read', errno: -104 }))).toBe('closed');
    expect(databaseOutage(Object.assign(new Error('connect ETIMEDOUT'), { code: 'ETIMEDOUT', syscall: 'connect', errno: -110 }))).toBe('timeout');
    expect(databaseOutage(new AggregateError([Object.assign(new Error('connect ECONNREFUSED ::1:5432'), { code: 'ECONNREFUSED' })], ''))).toBe('refused');
    // node-postgres / pg-pool messages (pg 8.23.1 lib/client.js, pg-pool 3.14.0 index.js).
    expect(databaseOutage(new Error('Connection terminated unexpectedly'))).toBe('closed');
    expect(databaseOutage(new Error('timeout exceeded when trying to connect'))).toBe('timeout');
    expect(databaseOutage(new Error('Connection terminated due to connection timeout', { cause: new Error('timeout expired') }))).toBe('closed');
    // Prisma codes (Prisma error reference): P1017 closed connection, P2037 too many connections.
    expect(databaseOutage(prismaError('P1017', 'Server has closed the connection.', { kind: 'ConnectionClosed' }))).toBe('closed');
    expect(databaseOutage(prismaError('P2037', 'Too many database connections opened', { kind: 'TooManyConnections', cause: 'x' }))).toBe('busy');
    expect(databaseOutage(prismaError('P2028', 'Transaction API error: Unable to start a transaction in the given time.'))).toBe('busy');
    expect(databaseOutage(Object.assign(new Error('database is locked'), { code: 'SQLITE_BUSY' }))).toBe('busy');
    expect(databaseOutage(new DatabaseTimeoutError('The database', 2000))).toBe('timeout');
  });

  it('leaves everything else alone (those stay conflicts, not-founds or 500s)', () => {
    expect(databaseOutage(prismaError('P2002', 'Unique constraint failed on the fields: (`email`)', { kind: 'UniqueConstraintViolation' }))).toBeNull();
    expect(databaseOutage(prismaError('P2025', 'Record to update not found.'))).toBeNull();
    expect(databaseOutage(prismaError('P2021', 'The table `Team` does not exist in the current database.', { kind: 'TableDoesNotExist' }))).toBeNull();
    expect(databaseOutage(prismaError('P2028', 'Transaction already closed: A query cannot be executed on an expired transaction.'))).toBeNull();
    expect(databaseOutage(prismaError('P2039', 'Database error. Code: `P0001`. Message: `AuditEvent is append-only`', { kind: 'postgres', code: 'P0001', originalCode: 'P0001' }))).toBeNull();
    expect(databaseOutage(Object.assign(new Error('protocol violation'), { code: '08P01' }))).toBeNull();
    expect(databaseOutage(new Error('connect ECONNREFUSED 10.0.0.5:5432 password=hunter2'))).toBeNull(); // no code: not a socket error
    expect(databaseOutage(new TypeError("Cannot read properties of undefined (reading 'id')"))).toBeNull();
    expect(databaseOutage(new Error('Cannot use a pool after calling end on the pool'))).toBeNull();
    expect(databaseOutage(null)).toBeNull();
    expect(databaseOutage('Connection terminated')).toBeNull();
  });
});

describe('the wrappers answer an outage with a retryable 503', () => {
  it('maps every recorded outage to the unavailable failure, logged as one JSON warning line', () => {
    const write = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    try {
      for (const error of Object.values(RECORDED)) {
        expect(failureFromError('castVote', error)).toEqual({ ok: false, status: 503, error: MESSAGES.unavailable, retryable: true });
      }
      const lines = write.mock.calls.map((c) => JSON.parse(String(c[0])));
      expect(lines).toHaveLength(5);
      expect(lines[1]).toMatchObject({ level: 'warn', msg: 'database unavailable', endpoint: 'castVote', outage: 'refused', error: "Can't reach database server at 127.0.0.1:42723" });
    } finally {
      write.mockRestore();
    }
    expect(MESSAGES.unavailable).toBe('The database is not answering right now. Nothing was changed; try again in a moment.');
  });

  it('a route failure carries Retry-After and the same message; other failures do not', async () => {
    const res = failureResponse({ ok: false, status: 503, error: MESSAGES.unavailable, retryable: true });
    expect(res.status).toBe(503);
    expect(res.headers.get('retry-after')).toBe(String(RETRY_AFTER_SECONDS));
    expect(res.headers.get('cache-control')).toBe('no-store');
    expect(await res.json()).toEqual({ error: MESSAGES.unavailable, retryable: true });
    const refused = failureResponse(failureFromError('x', new ActionError(409, 'Taken.')));
    expect(refused.headers.get('retry-after')).toBeNull();
    expect(await refused.json()).toEqual({ error: 'Taken.' });
  });
});

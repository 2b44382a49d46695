// The PostgreSQL client pool is opened at start and kept open (lib/server/db.ts warmDbPool,
// PG_POOL_SIZE; instrumentation.ts calls it when the app starts): a burst of requests after a
// quiet spell must not wait for new connections. node-postgres closes an idle connection after
// idleTimeoutMillis (10 s by default) unless the pool is at its `min`.
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb, PG_POOL_SIZE, warmDbPool, type Db } from '@/lib/server/db';
import { parseDatabaseUrl } from '@/lib/server/env';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';

let t: TestDatabase;
beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
});
afterAll(async () => {
  await t.drop();
});

describe('opening the connection pool at start', () => {
  it.skipIf(TEST_PROVIDER !== 'postgresql')('opens all PG_POOL_SIZE connections at once and keeps them through a quiet spell', async () => {
    const watcher = new pg.Client({ connectionString: t.url });
    await watcher.connect();
    const others = async () =>
      Number((await watcher.query<{ n: string }>('SELECT count(*) AS n FROM pg_stat_activity WHERE datname = current_database() AND pid <> pg_backend_pid()')).rows[0].n);
    let client: Db | null = null;
    try {
      const before = await others();
      client = createDb(parseDatabaseUrl(t.url));
      await warmDbPool(client);
      expect(await others()).toBe(before + PG_POOL_SIZE);
      // Past node-postgres's 10 s idle timeout, nothing was closed.
      await new Promise((r) => setTimeout(r, 11_000));
      expect(await others()).toBe(before + PG_POOL_SIZE);
    } finally {
      await client?.$disconnect();
      await watcher.end();
    }
  }, 30_000);

  it.skipIf(TEST_PROVIDER !== 'sqlite')('is nothing to do on SQLite', async () => {
    const client = createDb(parseDatabaseUrl(t.url));
    await expect(warmDbPool(client)).resolves.toBeUndefined();
    await client.$disconnect();
  });
});

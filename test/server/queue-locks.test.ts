// Row locks of writeTx on PostgreSQL (lib/server/queue/tx.ts). Seen in bench:team (PostgreSQL's log,
// 2026-12-03): a deadlock between a closing vote and a refit's completing transaction. The
// completing transaction held the project's row and was rescoring queue items; the vote held its
// item, and its UPDATE of the item waited for the project's row — a foreign-key check
// (QueueItem.projectId), which PostgreSQL runs for a row its own transaction has already written,
// and the vote's lock statement was a no-op UPDATE of that row. PostgreSQL broke the cycle after
// deadlock_timeout (1 s) and the vote was retried: 1.2 s for that vote. Locks are now
// SELECT … FOR NO KEY UPDATE on PostgreSQL, so a vote never waits for the project's row.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb, type Db } from '@/lib/server/db';
import { writeTx } from '@/lib/server/queue/tx';
import { castVote } from '@/lib/server/queue/vote';
import { settleDeferredApplies } from '@/lib/server/queue/apply';
import { claimNext } from '@/lib/server/queue/claim';
import { createTestDatabase, TEST_PROVIDER, type TestDatabase } from './db-harness';
import { createItems, createQueueFixture, type QueueFixture } from './queue-fixtures';

/** A promise and its resolver, to order two transactions' statements. */
function signal(): { promise: Promise<void>; fire: () => void } {
  let fire = (): void => undefined;
  const promise = new Promise<void>((resolve) => (fire = resolve));
  return { promise, fire };
}

describe.skipIf(TEST_PROVIDER !== 'postgresql')('writeTx row locks on PostgreSQL', () => {
  let t: TestDatabase;
  let a: Db;
  let b: Db;
  let f: QueueFixture;
  let items: string[];
  beforeAll(async () => {
    t = await createTestDatabase();
    await t.migrate();
    a = t.client();
    b = createDb(t.config, { log: ['warn'] });
    f = await createQueueFixture(a, { samples: 4 });
    items = await createItems(a, f);
  });
  afterAll(async () => {
    await b.$disconnect();
    await t.drop();
  });

  it("a vote takes no lock on the project's row: it finishes while another transaction holds that row", async () => {
    const item = items[0];
    const held = signal();
    const votes: string[] = [];
    const voting = (async () => {
      await held.promise;
      const deps = { db: b };
      for (const reviewer of f.reviewers.slice(0, 2)) {
        const r = await castVote(deps, f.scope, reviewer, { projectId: f.projectId, itemId: item, decision: 'keep' });
        votes.push(r.result);
      }
    })();
    // The strongest row lock on the project (FOR UPDATE conflicts with the FOR KEY SHARE of a
    // foreign-key check), held until both votes are in or 5 s have passed.
    const seenWhileHeld = await a.$transaction(
      async (tx) => {
        await tx.$queryRaw`SELECT "id" FROM "Project" WHERE "id" = ${f.projectId} FOR UPDATE`;
        held.fire();
        await Promise.race([voting, new Promise((r) => setTimeout(r, 5000))]);
        return [...votes];
      },
      { timeout: 10_000 },
    );
    await voting;
    await settleDeferredApplies();
    expect(seenWhileHeld).toEqual(['recorded', 'closed']);
  });

  it('"next" during a refit\'s queue rebuild waits for it instead of answering "nothing to review"', async () => {
    // The completing transaction of a refit rescores every item awaiting votes (build.ts) and holds
    // their rows until it commits; the claim passes over rows locked by other claims (SKIP LOCKED).
    const fresh = await createQueueFixture(a, { samples: 5 });
    await createItems(a, fresh);
    const rescored = signal();
    const rebuild = a.$transaction(async (tx) => {
      await tx.$executeRaw`UPDATE "QueueItem" SET "suspicion" = "suspicion" + 1 WHERE "projectId" = ${fresh.projectId}`;
      rescored.fire();
      await new Promise((r) => setTimeout(r, 300));
    });
    await rescored.promise;
    const claimed = await claimNext({ db: b }, fresh.scope, fresh.reviewers[0], { projectId: fresh.projectId });
    await rebuild;
    expect(claimed).not.toBeNull();
    const item = await a.queueItem.findUniqueOrThrow({ where: { id: claimed?.itemId ?? '' }, select: { projectId: true, leaseUserId: true } });
    expect(item).toEqual({ projectId: fresh.projectId, leaseUserId: fresh.reviewers[0].userId });
  });

  it('a row lock still makes a second transaction on the same item wait for the first', async () => {
    const firstHolds = signal();
    const order: string[] = [];
    const item = items[1];
    const first = writeTx(a, [{ table: 'QueueItem', id: item }], async () => {
      firstHolds.fire();
      await new Promise((r) => setTimeout(r, 200));
      order.push('first done');
    });
    await firstHolds.promise;
    const second = writeTx(b, [{ table: 'QueueItem', id: item }], async () => {
      order.push('second inside');
    });
    await Promise.all([first, second]);
    expect(order).toEqual(['first done', 'second inside']);
  });
});

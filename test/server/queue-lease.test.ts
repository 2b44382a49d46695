// "Next" and its lease, with an injected clock (no waiting). Rules from lib/server/queue/claim.ts:
// 90 s leases, one holder at a time, one-vote items first, never an item the caller voted on, never
// a one-vote item inside its 10 s undo window.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase, type TestDatabase } from './db-harness';
import { createItems, createQueueFixture, manualClock, refusedWith } from './queue-fixtures';
import { Prisma, type Db } from '@/lib/server/db';
import { dataRevisionKey, dataRevisionKeyColumns, featureMatrixForReading, formatDataRevisionKey } from '@/lib/server/fits/data';
import { claimNext, releaseLease } from '@/lib/server/queue/claim';
import { castVote } from '@/lib/server/queue/vote';
import { itemForReviewer } from '@/lib/server/queue/view';
import { nextForReviewer } from '@/lib/server/queue/next';
import { packDetail } from '@/lib/server/fits/standings-store';

let t: TestDatabase;
let db: Db;

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  db = t.client();
});
afterAll(async () => {
  await t.drop();
});

describe('claiming the next item', () => {
  it('hands out the most suspicious free item, one reviewer at a time, and renews on a repeated claim', async () => {
    const f = await createQueueFixture(db, { samples: 4 });
    const items = await createItems(db, f); // suspicion descending: items[0] highest
    const clock = manualClock();
    const deps = { db, clock };
    const [a, b, c] = f.reviewers;
    const ca = await claimNext(deps, f.scope, a, { projectId: f.projectId });
    expect(ca?.itemId).toBe(items[0]);
    // hand-worked: claimed at 09:00:00, lease 90 s
    expect(ca?.leaseExpiresAt.toISOString()).toBe('2030-01-01T09:01:30.000Z');
    const cb = await claimNext(deps, f.scope, b, { projectId: f.projectId });
    expect(cb?.itemId).toBe(items[1]);
    clock.advance(60_000);
    const again = await claimNext(deps, f.scope, a, { projectId: f.projectId });
    expect(again?.itemId).toBe(items[0]);
    expect(again?.leaseExpiresAt.toISOString()).toBe('2030-01-01T09:02:30.000Z');
    // c gets neither leased item
    const cc = await claimNext(deps, f.scope, c, { projectId: f.projectId });
    expect(cc?.itemId).toBe(items[2]);
    // a lease holds one item per reviewer: a's only lease is items[0]
    const leased = await db.queueItem.findMany({ where: { projectId: f.projectId, leaseUserId: a.userId } });
    expect(leased.map((i) => i.id)).toEqual([items[0]]);
  });

  it('an expired lease frees the item for someone else', async () => {
    const f = await createQueueFixture(db, { samples: 1 });
    const [item] = await createItems(db, f);
    const clock = manualClock();
    const deps = { db, clock };
    const [a, b] = f.reviewers;
    expect((await claimNext(deps, f.scope, a, { projectId: f.projectId }))?.itemId).toBe(item);
    clock.advance(89_999);
    expect(await claimNext(deps, f.scope, b, { projectId: f.projectId })).toBeNull();
    // While a's lease is live, b cannot vote on it either.
    const r = await refusedWith(castVote(deps, f.scope, b, { projectId: f.projectId, itemId: item, decision: 'keep' }));
    expect(r).toEqual({ status: 409, message: 'Another reviewer is working on this item right now. Take the next one.' });
    clock.advance(2);
    expect((await claimNext(deps, f.scope, b, { projectId: f.projectId }))?.itemId).toBe(item);
  });

  it('a one-vote item goes to a second reviewer after the undo window, never back to its voter, and before open items', async () => {
    const f = await createQueueFixture(db, { samples: 3 });
    const items = await createItems(db, f);
    const clock = manualClock();
    const deps = { db, clock };
    const [a, b] = f.reviewers;
    // a takes and votes on the LEAST suspicious item.
    await castVote(deps, f.scope, a, { projectId: f.projectId, itemId: items[2], decision: 'keep' });
    clock.advance(5_000);
    // Inside a's undo window the item is not handed out: b gets the most suspicious open item.
    expect((await claimNext(deps, f.scope, b, { projectId: f.projectId }))?.itemId).toBe(items[0]);
    await releaseLease(deps, f.scope, b, { projectId: f.projectId, itemId: items[0] });
    clock.advance(5_001);
    // After the window, the one-vote item comes first for b ...
    expect((await claimNext(deps, f.scope, b, { projectId: f.projectId }))?.itemId).toBe(items[2]);
    // ... and never for a, who voted on it.
    expect((await claimNext(deps, f.scope, a, { projectId: f.projectId }))?.itemId).toBe(items[0]);
  });

  it('skip releases the lease and moves on; closed and split items are never handed out; observers cannot claim', async () => {
    const f = await createQueueFixture(db, { samples: 3 });
    const items = await createItems(db, f);
    const clock = manualClock();
    const deps = { db, clock };
    const [a, b, c] = f.reviewers;
    expect((await claimNext(deps, f.scope, a, { projectId: f.projectId }))?.itemId).toBe(items[0]);
    const skipped = await claimNext(deps, f.scope, a, { projectId: f.projectId, skipItemId: items[0] });
    expect(skipped?.itemId).toBe(items[1]);
    expect((await db.queueItem.findUniqueOrThrow({ where: { id: items[0] } })).leaseUserId).toBeNull();
    // Close items[0] (two keeps) and split items[2].
    await castVote(deps, f.scope, b, { projectId: f.projectId, itemId: items[0], decision: 'keep' });
    await castVote(deps, f.scope, c, { projectId: f.projectId, itemId: items[0], decision: 'keep' });
    await castVote(deps, f.scope, b, { projectId: f.projectId, itemId: items[2], decision: 'keep' });
    const s2 = await db.sample.findFirstOrThrow({ where: { queueItems: { some: { id: items[2] } } } });
    await castVote(deps, f.scope, c, { projectId: f.projectId, itemId: items[2], decision: 'relabel', label: f.classes.find((x) => x !== s2.currentLabel) as string });
    clock.advance(20_000);
    await releaseLease(deps, f.scope, a, { projectId: f.projectId, itemId: items[1] });
    const d = f.reviewers[0];
    expect((await claimNext(deps, f.scope, d, { projectId: f.projectId }))?.itemId).toBe(items[1]);
    expect(await claimNext(deps, f.scope, b, { projectId: f.projectId })).toBeNull();
    const obs = await refusedWith(claimNext(deps, f.scope, f.observer, { projectId: f.projectId }));
    expect(obs).toEqual({ status: 403, message: 'Observers can read the queue but cannot vote.' });
  });

  it('a scope of another team claims nothing and reads nothing: "not found", no lease taken', async () => {
    // The scope check sits inside the claim and item-read statements (next.ts), not in a read before them.
    const f = await createQueueFixture(db, { samples: 2 });
    const other = await createQueueFixture(db, { samples: 1 });
    const items = await createItems(db, f);
    const deps = { db, clock: manualClock() };
    const [a] = f.reviewers;
    const claim = await refusedWith(claimNext(deps, other.scope, a, { projectId: f.projectId }));
    expect(claim).toEqual({ status: 404, message: 'Not found. It may have been removed, or you may not have access to it.' });
    expect(await db.queueItem.count({ where: { projectId: f.projectId, leaseUserId: { not: null } } })).toBe(0);
    const view = await refusedWith(itemForReviewer(deps, other.scope, a, f.projectId, items[0]));
    expect(view).toEqual({ status: 404, message: 'Not found. It may have been removed, or you may not have access to it.' });
    // The same reviewer in the right scope gets the item.
    expect((await claimNext(deps, f.scope, a, { projectId: f.projectId }))?.itemId).toBe(items[0]);
  });

  it('two reviewers racing for the only free item: exactly one gets it', async () => {
    const f = await createQueueFixture(db, { samples: 1, reviewers: 8 });
    const [item] = await createItems(db, f);
    const clock = manualClock();
    const results = await Promise.all(f.reviewers.map((r) => claimNext({ db, clock }, f.scope, r, { projectId: f.projectId })));
    const winners = results.filter((x) => x !== null);
    expect(winners).toHaveLength(1);
    expect(winners[0]?.itemId).toBe(item);
  });
});

describe('"next" with a wait for neighbours (QueueDeps.neighbourWaitMs, the reviewer screen)', () => {
  it('a search not done within the wait: the item comes at once without neighbours; asked again, the same item with them', async () => {
    const f = await createQueueFixture(db, { samples: 12 });
    await createItems(db, f);
    const [a] = f.reviewers;
    const clock = manualClock();
    const input = { projectId: f.projectId };
    const first = await nextForReviewer({ db, clock, neighbourWaitMs: 0 }, f.scope, a, input);
    expect(first?.sample.externalId).toBeDefined();
    expect(first?.neighbours).toBeNull();
    let again = first;
    for (let k = 0; k < 200 && again?.neighbours === null; k++) {
      await new Promise((r) => setTimeout(r, 25));
      again = await nextForReviewer({ db, clock, neighbourWaitMs: 0 }, f.scope, a, input);
    }
    expect(again?.itemId).toBe(first?.itemId);
    expect(again?.neighbours).toHaveLength(5);
    // The same five as without a wait (services and tests wait for the search).
    const waited = await nextForReviewer({ db, clock }, f.scope, a, input);
    expect(again?.neighbours).toEqual(waited?.neighbours);
  });
});

describe('"next" before the feature matrix is in memory (a just-started server)', () => {
  it('with a wait budget: the item and its standing come at once without neighbours; once the matrix is read, with them', async () => {
    const f = await createQueueFixture(db, { samples: 12 });
    const [top] = await createItems(db, f);
    const [a] = f.reviewers;
    const clock = manualClock();
    const input = { projectId: f.projectId };
    // A matrix read that takes as long as the test says (seconds for 100k × 256 in production).
    let release: () => void = () => undefined;
    const held = new Promise<void>((resolve) => (release = resolve));
    let reads = 0;
    const slowMatrix = async (d: Db, projectId: string, revisionKey: string) => {
      reads++;
      await held;
      return featureMatrixForReading(d, projectId, revisionKey);
    };
    const deps = { db, clock, neighbourWaitMs: 30, featureMatrix: slowMatrix };
    const timeout = new Promise<'timed out'>((resolve) => setTimeout(() => resolve('timed out'), 5000));
    const first = await Promise.race([nextForReviewer(deps, f.scope, a, input), timeout]);
    if (first === 'timed out' || first === null) throw new Error(`"next" answered ${String(first)}`);
    expect(first.itemId).toBe(top);
    expect(first.neighbours).toBeNull();
    expect(first.classes).toEqual(f.classes);
    expect(first.leaseExpiresAt).toBe('2030-01-01T09:01:30.000Z');
    expect(reads).toBe(1);
    release();
    const waited = await nextForReviewer({ db, clock }, f.scope, a, input);
    let again = await nextForReviewer(deps, f.scope, a, input);
    for (let k = 0; k < 200 && again?.neighbours === null; k++) {
      await new Promise((r) => setTimeout(r, 25));
      again = await nextForReviewer(deps, f.scope, a, input);
    }
    expect(again?.itemId).toBe(top);
    expect(again?.neighbours).toHaveLength(5);
    expect(again?.neighbours).toEqual(waited?.neighbours);
  });

  it('without a wait budget (services, scripts): "next" waits for the matrix and answers with the neighbours', async () => {
    const f = await createQueueFixture(db, { samples: 12 });
    await createItems(db, f);
    const [a] = f.reviewers;
    let finished = false;
    const slowMatrix = async (d: Db, projectId: string, revisionKey: string) => {
      await new Promise((r) => setTimeout(r, 100));
      finished = true;
      return featureMatrixForReading(d, projectId, revisionKey);
    };
    const view = await nextForReviewer({ db, clock: manualClock(), featureMatrix: slowMatrix }, f.scope, a, { projectId: f.projectId });
    expect(finished).toBe(true);
    expect(view?.neighbours).toHaveLength(5);
  });
});

describe('what "next" reads with the item (one statement) and caches by data revision', () => {
  it('the data revision key read as columns of another statement is the key dataRevisionKey reads', async () => {
    const f = await createQueueFixture(db, { samples: 2 });
    const asColumns = async (projectId: string) => {
      const rows = await db.$queryRaw<{ dataRevisionNumber: number | bigint | null; dataRevisionAt: Date | string | number | null }[]>`
        SELECT ${dataRevisionKeyColumns(Prisma.sql`${projectId}`)}`;
      return formatDataRevisionKey(rows[0].dataRevisionNumber, rows[0].dataRevisionAt);
    };
    const at0 = await dataRevisionKey(db, f.projectId);
    expect(at0).toMatch(/^0:\d+$/);
    expect(await asColumns(f.projectId)).toBe(at0);
    // A review revision does not change the features: same key. An update revision does.
    await db.revision.create({ data: { projectId: f.projectId, number: 1, kind: 'review' } });
    expect(await asColumns(f.projectId)).toBe(at0);
    await db.revision.create({ data: { projectId: f.projectId, number: 2, kind: 'update' } });
    const at2 = await dataRevisionKey(db, f.projectId);
    expect(at2).toMatch(/^2:\d+$/);
    expect(await asColumns(f.projectId)).toBe(at2);
    // No revision at all.
    const bare = await db.project.create({ data: { teamId: f.teamId, name: 'Bare', featureCount: 2, settings: '{}' } });
    expect(await dataRevisionKey(db, bare.id)).toBe('-1:0');
    expect(await asColumns(bare.id)).toBe('-1:0');
  });

  it('a class added by a later import shows in the item read at once, in position order', async () => {
    const f = await createQueueFixture(db, { samples: 4, classes: ['refund', 'shipping', 'account'] });
    await createItems(db, f);
    const [a] = f.reviewers;
    const deps = { db, clock: manualClock() };
    const first = await nextForReviewer(deps, f.scope, a, { projectId: f.projectId });
    expect(first?.classes).toEqual(['refund', 'shipping', 'account']);
    // What an import that brings a new class writes in its transaction (lib/server/import/apply.ts).
    await db.$transaction([
      db.revision.create({ data: { projectId: f.projectId, number: 1, kind: 'import' } }),
      db.projectClass.create({ data: { projectId: f.projectId, name: 'billing', position: 3 } }),
    ]);
    const again = await nextForReviewer(deps, f.scope, a, { projectId: f.projectId });
    expect(again?.itemId).toBe(first?.itemId);
    expect(again?.classes).toEqual(['refund', 'shipping', 'account', 'billing']);
  });

  it('"next" shows the sample\'s newest standing of a done fit — highest revision, then the newer fit — the same view as reading the item afterwards', async () => {
    // On PostgreSQL the claim statement reads the standing itself (claim.ts, view.ts
    // `reviewItemWithStandingSql`); on SQLite `standingOf` picks it. Hand-made fits, so the answer is
    // known: revision 2 failed (ignored), revision 1 has two done fits (the later one wins), revision 0 is older.
    const f = await createQueueFixture(db, { samples: 2, classes: ['refund', 'shipping', 'account'] });
    const [top] = await createItems(db, f);
    const item = await db.queueItem.findUniqueOrThrow({ where: { id: top } });
    const revisions = new Map<number, string>();
    revisions.set(0, (await db.revision.findFirstOrThrow({ where: { projectId: f.projectId, number: 0 } })).id);
    for (const n of [1, 2]) revisions.set(n, (await db.revision.create({ data: { projectId: f.projectId, number: n, kind: 'review' } })).id);
    const metrics = JSON.stringify({ classes: f.classes, nearBand: 1 });
    const fit = async (revisionNumber: number, status: string, createdAt: string, margin: number) => {
      const created = await db.fit.create({
        data: { projectId: f.projectId, revisionId: revisions.get(revisionNumber) as string, revisionNumber, status, settings: '{}', metrics, createdAt: new Date(createdAt) },
      });
      await db.standing.create({
        data: {
          fitId: created.id, sampleId: item.sampleId, margin, distance: margin, slack: 0, alpha: 0, svKind: 'none', oofMargin: null,
          flags: 'near-boundary', suspicion: 0.5, predicted: 'refund', detail: packDetail([margin, -0.5, -0.9], null),
        },
      });
      return created.id;
    };
    // Inserted out of order, so that neither insertion order nor id order gives the answer.
    const later = await fit(1, 'done', '2030-01-01T08:05:00.000Z', 0.3);
    await fit(1, 'done', '2030-01-01T08:00:00.000Z', 0.2);
    await fit(2, 'failed', '2030-01-01T08:10:00.000Z', 0.4);
    await fit(0, 'done', '2030-01-01T07:00:00.000Z', 0.1);
    const [a] = f.reviewers;
    const deps = { db, clock: manualClock() };
    const next = await nextForReviewer(deps, f.scope, a, { projectId: f.projectId });
    expect(next?.itemId).toBe(top);
    expect(next?.standing?.fitId).toBe(later);
    expect(next?.standing?.fitRevision).toBe(1);
    expect(next?.standing?.margin).toBeCloseTo(0.3, 12);
    expect(next?.standing?.flags).toEqual(['near-boundary']);
    expect(next?.leaseExpiresAt).toBe('2030-01-01T09:01:30.000Z');
    expect(next).toEqual(await itemForReviewer(deps, f.scope, a, f.projectId, top));
    // A sample without any standing: none shown.
    await db.standing.deleteMany({ where: { sampleId: item.sampleId } });
    const bare = await nextForReviewer(deps, f.scope, a, { projectId: f.projectId });
    expect(bare?.itemId).toBe(top);
    expect(bare?.standing).toBeNull();
  });
});

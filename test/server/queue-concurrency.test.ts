// 20 simulated reviewers voting in parallel on the same items, through several database
// connections at once (separate Prisma clients = separate sessions on SQLite and PostgreSQL),
// with the apply rule firing while votes arrive. Afterwards the books must balance:
// - every accepted vote is exactly one Vote row, no item has more than two, nobody twice;
// - each item's state matches its votes (0 → open, 1 → one-vote, 2 agreeing → closed with that
//   outcome, 2 disagreeing → split until a lead decides);
// - every relabel lands in exactly one revision: one LabelChange per relabelled item, revisions
//   numbered 1..K without gaps, each with changeCount equal to its LabelChange rows, and the
//   sample's label equal to the agreed class; each revision has a queued refit.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb, type Db } from '@/lib/server/db';
import { castVote, decideSplit } from '@/lib/server/queue/vote';
import { applyChanges, settleDeferredApplies } from '@/lib/server/queue/apply';
import { claimNext } from '@/lib/server/queue/claim';
import { ActionError } from '@/lib/server/authz/errors';
import { createTestDatabase, type TestDatabase } from './db-harness';
import { createItems, createQueueFixture, type QueueFixture } from './queue-fixtures';

let t: TestDatabase;
let clients: Db[];

beforeAll(async () => {
  t = await createTestDatabase();
  await t.migrate();
  clients = [t.client(), ...Array.from({ length: 4 }, () => createDb(t.config, { log: ['warn'] }))];
});
afterAll(async () => {
  for (const c of clients.slice(1)) await c.$disconnect();
  await t.drop();
});

/** Deterministic "opinion" of reviewer r on item k: most agree, some disagree. */
function opinion(f: QueueFixture, k: number, r: number, current: string): { decision: 'keep' } | { decision: 'relabel'; label: string } {
  const others = f.classes.filter((c) => c !== current);
  const truthRelabel = k % 3 !== 0;
  const dissent = (k * 7 + r * 3) % 10 === 0; // about one vote in ten disagrees
  if (truthRelabel !== dissent) return { decision: 'relabel', label: others[dissent ? 1 : 0] };
  return { decision: 'keep' };
}

async function checkBooks(f: QueueFixture, db: Db, accepted: number): Promise<void> {
  const items = await db.queueItem.findMany({
    where: { projectId: f.projectId },
    include: { votes: true, sample: true, changes: true },
  });
  const votes = await db.vote.findMany({ where: { queueItem: { projectId: f.projectId } } });
  expect(votes.length).toBe(accepted);
  const pairs = new Set(votes.map((v) => `${v.queueItemId}/${v.userId}`));
  expect(pairs.size).toBe(votes.length);
  for (const it of items) {
    expect(it.votes.length).toBeLessThanOrEqual(2);
    if (it.votes.length === 0) expect(it.state).toBe('open');
    if (it.votes.length === 1) expect(it.state).toBe('one-vote');
    if (it.votes.length === 2) {
      const [a, b] = it.votes;
      const agree = a.decision === b.decision && (a.decision === 'keep' || a.label === b.label);
      if (agree) {
        expect(it.state).toBe('closed');
        expect(it.outcome).toBe(a.decision === 'keep' ? 'kept' : 'relabelled');
        expect(it.tiebreakById).toBeNull();
      } else {
        expect(['split', 'closed']).toContain(it.state);
        if (it.state === 'closed') expect(it.tiebreakById).toBe(f.lead.userId);
      }
    }
    if (it.state === 'closed' && it.outcome === 'relabelled') {
      expect(it.appliedRevision).not.toBeNull();
      expect(it.changes).toHaveLength(1);
      expect(it.changes[0].revisionNumber).toBe(it.appliedRevision);
      expect(it.changes[0].toLabel).toBe(it.finalLabel);
      expect(it.sample.currentLabel).toBe(it.finalLabel);
      expect(it.sample.labelRevision).toBe(it.appliedRevision);
    } else {
      expect(it.changes).toHaveLength(0);
    }
  }
  const project = await db.project.findUniqueOrThrow({ where: { id: f.projectId } });
  const revisions = await db.revision.findMany({ where: { projectId: f.projectId }, orderBy: { number: 'asc' } });
  expect(revisions.map((r) => r.number)).toEqual(Array.from({ length: project.currentRevision + 1 }, (_, i) => i));
  const changes = await db.labelChange.findMany({ where: { projectId: f.projectId } });
  for (const r of revisions.slice(1)) {
    expect(r.changeCount).toBe(changes.filter((c) => c.revisionNumber === r.number).length);
    expect(r.changeCount).toBeGreaterThan(0);
  }
  const relabelled = items.filter((i) => i.outcome === 'relabelled').length;
  expect(changes.length).toBe(relabelled);
  expect(new Set(changes.map((c) => c.queueItemId)).size).toBe(changes.length);
  const fits = await db.fit.findMany({ where: { projectId: f.projectId }, orderBy: { revisionNumber: 'asc' } });
  expect(fits.map((x) => x.revisionNumber)).toEqual(revisions.slice(1).map((r) => r.number));
}

describe('20 reviewers at once', () => {
  it('voting directly on the same items in parallel: no lost or duplicated votes, revisions add up', async () => {
    const db = clients[0];
    const f = await createQueueFixture(db, { reviewers: 20, samples: 30, settings: { applyEvery: 4 } });
    const itemIds = await createItems(db, f);
    const labels = new Map((await db.sample.findMany({ where: { projectId: f.projectId } })).map((s) => [s.id, s.currentLabel]));
    const itemSample = new Map((await db.queueItem.findMany({ where: { projectId: f.projectId } })).map((i) => [i.id, i.sampleId]));
    let accepted = 0;
    const unexpected: unknown[] = [];
    await Promise.all(
      f.reviewers.map(async (reviewer, r) => {
        const client = clients[r % clients.length];
        // Each reviewer walks the items in its own order, so they collide constantly.
        const order = itemIds.map((_, k) => k).sort((x, y) => ((x * 13 + r * 7) % 31) - ((y * 13 + r * 7) % 31));
        for (const k of order) {
          const itemId = itemIds[k];
          const current = labels.get(itemSample.get(itemId) as string) as string;
          try {
            await castVote({ db: client }, f.scope, reviewer, { projectId: f.projectId, itemId, ...opinion(f, k, r, current) });
            accepted++;
          } catch (e) {
            if (!(e instanceof ActionError && e.status === 409)) unexpected.push(e);
          }
        }
      }),
    );
    expect(unexpected).toEqual([]);
    // 30 items × 2 votes: every item got exactly its two votes.
    expect(accepted).toBe(60);
    // The lead settles the splits, then applies whatever the rule left pending.
    const splits = await db.queueItem.findMany({ where: { projectId: f.projectId, state: 'split' }, include: { sample: true } });
    expect(splits.length).toBeGreaterThan(0);
    for (const s of splits) await decideSplit({ db }, f.scope, f.lead, { projectId: f.projectId, itemId: s.id, decision: 'keep' });
    // Checks of the apply rule that found the project locked (PostgreSQL) finish first.
    await settleDeferredApplies();
    await applyChanges({ db }, f.scope, f.lead, f.projectId);
    await checkBooks(f, db, accepted);
  });

  it('claiming with "next" and voting in parallel: each item gets two votes from two people', async () => {
    const db = clients[0];
    const f = await createQueueFixture(db, { reviewers: 20, samples: 25, settings: { applyEvery: 3 } });
    const itemIds = await createItems(db, f);
    const labels = new Map((await db.sample.findMany({ where: { projectId: f.projectId } })).map((s) => [s.id, s.currentLabel]));
    const itemIndex = new Map(itemIds.map((id, k) => [id, k]));
    const itemSample = new Map((await db.queueItem.findMany({ where: { projectId: f.projectId } })).map((i) => [i.id, i.sampleId]));
    let accepted = 0;
    const unexpected: unknown[] = [];
    // The undo window keeps one-vote items back for 10 s; a clock that jumps 11 s per call lets
    // the second votes flow without the test waiting.
    let tick = Date.parse('2030-01-01T09:00:00Z');
    const clock = () => new Date((tick += 11_000));
    await Promise.all(
      f.reviewers.map(async (reviewer, r) => {
        const client = clients[r % clients.length];
        for (let round = 0; round < 40; round++) {
          let claimed;
          try {
            claimed = await claimNext({ db: client, clock }, f.scope, reviewer, { projectId: f.projectId });
          } catch (e) {
            unexpected.push(e);
            return;
          }
          if (!claimed) return;
          const k = itemIndex.get(claimed.itemId) as number;
          const current = labels.get(itemSample.get(claimed.itemId) as string) as string;
          try {
            await castVote({ db: client, clock }, f.scope, reviewer, { projectId: f.projectId, itemId: claimed.itemId, ...opinion(f, k, r, current) });
            accepted++;
          } catch (e) {
            if (!(e instanceof ActionError && e.status === 409)) unexpected.push(e);
          }
        }
      }),
    );
    expect(unexpected).toEqual([]);
    expect(accepted).toBe(50);
    for (const s of await db.queueItem.findMany({ where: { projectId: f.projectId, state: 'split' } })) {
      await decideSplit({ db }, f.scope, f.lead, { projectId: f.projectId, itemId: s.id, decision: 'keep' });
    }
    // Checks of the apply rule that found the project locked (PostgreSQL) finish first.
    await settleDeferredApplies();
    await applyChanges({ db }, f.scope, f.lead, f.projectId);
    await checkBooks(f, db, accepted);
  });
});

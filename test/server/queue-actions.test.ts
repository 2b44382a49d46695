// The queue's server actions and status route through the authorization wrapper, with real session
// cookies (auth-harness): the allowed callers get through, observers and strangers are refused with
// the wrapper's messages, votes stay blind, and 20 reviewer sessions voting at once through the
// actions leave the books balanced.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { castVote } from '@/app/actions/cast-vote';
import { claimNextItem } from '@/app/actions/claim-next-item';
import { decideSplit } from '@/app/actions/decide-split';
import { applyChanges } from '@/app/actions/apply-changes';
import { withdrawVote } from '@/app/actions/withdraw-vote';
import { updateProjectSettings } from '@/app/actions/update-project-settings';
import { GET as statusRoute } from '@/app/api/projects/[projectId]/status/route';
import { setFitJobQueue, type FitJobQueue } from '@/lib/server/fits/jobs';
import { DEFAULT_PROJECT_SETTINGS } from '@/lib/domain-queue';
import { call, contextFor, openAppDatabase, sessionFor, type AppDatabase } from './auth-harness';
import { createItems, createQueueFixture, type QueueFixture } from './queue-fixtures';

let app: AppDatabase;

// A stand-in job queue: the actions notify it; no fit runs in this file.
const notified: { projectId: string; revisionNumber: number }[] = [];
const recordingQueue: FitJobQueue = {
  enqueue: async (r) => {
    notified.push({ projectId: r.projectId, revisionNumber: r.revisionNumber });
  },
  start: async () => {},
  stop: async () => {},
  idle: async () => {},
};

beforeAll(async () => {
  app = await openAppDatabase();
  setFitJobQueue(recordingQueue);
});
afterAll(async () => {
  setFitJobQueue(null);
  await app.close();
});

async function as(userId: string) {
  const cookie = await sessionFor(userId);
  return <T>(fn: () => Promise<T>) => call(contextFor(cookie), fn);
}

describe('queue actions through the wrapper', () => {
  let f: QueueFixture;
  let items: string[];
  beforeAll(async () => {
    f = await createQueueFixture(app.client, { samples: 6, settings: { applyEvery: 0 } });
    items = await createItems(app.client, f);
  });

  it('"next", vote, undo and vote again as a reviewer; the answer never carries votes', async () => {
    const r = await as(f.reviewers[0].userId);
    const claimed = await r(() => claimNextItem({ projectId: f.projectId }));
    expect(claimed.ok).toBe(true);
    if (!claimed.ok || !claimed.data.item) throw new Error('expected an item');
    expect(claimed.data.item.itemId).toBe(items[0]);
    expect(JSON.stringify(claimed.data)).not.toMatch(/"votes"|"state"/);
    const v = await r(() => castVote({ projectId: f.projectId, itemId: items[0], decision: 'keep', note: '  fine as it is ' }));
    expect(v).toMatchObject({ ok: true, data: { result: 'recorded', applied: null } });
    if (!v.ok) throw new Error('vote refused');
    expect((await app.client.vote.findUniqueOrThrow({ where: { id: v.data.voteId } })).note).toBe('fine as it is');
    const w = await r(() => withdrawVote({ projectId: f.projectId, voteId: v.data.voteId }));
    expect(w).toEqual({ ok: true, data: { itemId: items[0], state: 'open', leased: true } });
    const again = await r(() => castVote({ projectId: f.projectId, itemId: items[0], decision: 'keep' }));
    expect(again.ok).toBe(true);
    const twice = await r(() => castVote({ projectId: f.projectId, itemId: items[0], decision: 'keep' }));
    expect(twice).toEqual({ ok: false, status: 409, error: 'You have already voted on this item; the second vote must come from another reviewer.' });
  });

  it('refuses observers with the wrapper’s message and strangers as not found', async () => {
    const o = await as(f.observer.userId);
    expect(await o(() => castVote({ projectId: f.projectId, itemId: items[1], decision: 'keep' }))).toEqual({
      ok: false,
      status: 403,
      error: 'Only a team member with the reviewer or lead role can do this.',
    });
    expect((await o(() => claimNextItem({ projectId: f.projectId }))).ok).toBe(false);
    const other = await createQueueFixture(app.client);
    const s = await as(other.lead.userId);
    const r = await s(() => castVote({ projectId: f.projectId, itemId: items[1], decision: 'keep' }));
    expect(r).toMatchObject({ ok: false, status: 404 });
    expect(await app.client.vote.count({ where: { queueItemId: items[1] } })).toBe(0);
  });

  it('validates input: a relabel needs a class, notes are capped', async () => {
    const r = await as(f.reviewers[1].userId);
    const noLabel = await r(() => castVote({ projectId: f.projectId, itemId: items[1], decision: 'relabel' }));
    expect(noLabel).toMatchObject({ ok: false, status: 400 });
    const long = await r(() => castVote({ projectId: f.projectId, itemId: items[1], decision: 'keep', note: 'x'.repeat(501) }));
    expect(long).toMatchObject({ ok: false, status: 413, error: 'Note is too long (at most 500 characters).' });
  });

  it('a split goes to a lead; apply makes a revision and notifies the fit queue', async () => {
    const [a, b] = f.reviewers;
    const sample = await app.client.sample.findFirstOrThrow({ where: { queueItems: { some: { id: items[2] } } } });
    const others = f.classes.filter((c) => c !== sample.currentLabel);
    await (await as(a.userId))(() => castVote({ projectId: f.projectId, itemId: items[2], decision: 'relabel', label: others[0] }));
    await (await as(b.userId))(() => castVote({ projectId: f.projectId, itemId: items[2], decision: 'keep' }));
    const reviewerDecides = await (await as(a.userId))(() => decideSplit({ projectId: f.projectId, itemId: items[2], decision: 'keep' }));
    expect(reviewerDecides).toMatchObject({ ok: false, status: 403 });
    const lead = await as(f.lead.userId);
    const res = await lead(() => statusRoute(new Request('http://127.0.0.1/x'), { params: Promise.resolve({ projectId: f.projectId }) }));
    expect(res.status).toBe(200);
    const board = (await res.json()) as { lead: { splits: { itemId: string; votes: unknown[] }[] } | null; status: { counts: { split: number } } };
    expect(board.status.counts.split).toBe(1);
    expect(board.lead?.splits.map((s) => [s.itemId, s.votes.length])).toEqual([[items[2], 2]]);
    // A reviewer polling the same route gets no lead data (and so no votes).
    const asReviewer = await (await as(a.userId))(() => statusRoute(new Request('http://127.0.0.1/x'), { params: Promise.resolve({ projectId: f.projectId }) }));
    expect(((await asReviewer.json()) as { lead: unknown }).lead).toBeNull();

    const decided = await lead(() => decideSplit({ projectId: f.projectId, itemId: items[2], decision: 'relabel', label: others[0] }));
    expect(decided).toMatchObject({ ok: true, data: { outcome: 'relabelled' } });
    notified.length = 0;
    const applied = await lead(() => applyChanges({ projectId: f.projectId }));
    expect(applied).toEqual({ ok: true, data: { revisionNumber: 1, changeCount: 1 } });
    expect(notified).toEqual([{ projectId: f.projectId, revisionNumber: 1 }]);
  });

  it('settings: leads save them (a refit of the current revision is queued); cross-field checks answer 400', async () => {
    const lead = await as(f.lead.userId);
    notified.length = 0;
    const ok = await lead(() => updateProjectSettings({ projectId: f.projectId, settings: { ...DEFAULT_PROJECT_SETTINGS, C: 4, applyEvery: 0 } }));
    expect(ok).toMatchObject({ ok: true, data: { refitRevision: 1 } });
    expect(notified).toEqual([{ projectId: f.projectId, revisionNumber: 1 }]);
    const bad = await lead(() => updateProjectSettings({ projectId: f.projectId, settings: { ...DEFAULT_PROJECT_SETTINGS, kernel: 'rbf', solver: 'dcd' } }));
    expect(bad).toMatchObject({ ok: false, status: 400, error: 'Dual coordinate descent solves the linear kernel only; choose smo or auto for this kernel.' });
    const neg = await lead(() => updateProjectSettings({ projectId: f.projectId, settings: { ...DEFAULT_PROJECT_SETTINGS, C: -1 } }));
    expect(neg).toMatchObject({ ok: false, status: 400, error: 'C must be greater than 0.' });
    const stored = await app.client.project.findUniqueOrThrow({ where: { id: f.projectId } });
    expect((JSON.parse(stored.settings) as { C: number }).C).toBe(4);
  });
});

describe('20 reviewer sessions through the actions at once', () => {
  it('claim and vote in parallel: every item gets exactly two votes from two people', async () => {
    const f = await createQueueFixture(app.client, { reviewers: 20, samples: 20, settings: { applyEvery: 0 } });
    await createItems(app.client, f);
    const cookies = await Promise.all(f.reviewers.map((r) => sessionFor(r.userId)));
    let accepted = 0;
    const failures: unknown[] = [];
    // Each session: "next" then a vote, repeatedly. With the 10 s undo window holding one-vote
    // items back, sessions skip past the window by voting directly on the items others voted on.
    const itemIds = (await app.client.queueItem.findMany({ where: { projectId: f.projectId }, select: { id: true } })).map((i) => i.id);
    await Promise.all(
      cookies.map(async (cookie, r) => {
        const ctx = contextFor(cookie);
        const first = await call(ctx, () => claimNextItem({ projectId: f.projectId }));
        if (first.ok && first.data.item) {
          const v = await call(ctx, () => castVote({ projectId: f.projectId, itemId: first.data.item?.itemId as string, decision: 'keep' }));
          if (v.ok) accepted++;
          else if (v.status !== 409) failures.push(v);
        }
        for (let k = 0; k < itemIds.length; k++) {
          const itemId = itemIds[(k + r) % itemIds.length];
          const v = await call(ctx, () => castVote({ projectId: f.projectId, itemId, decision: 'keep' }));
          if (v.ok) accepted++;
          else if (v.status !== 409) failures.push(v);
        }
      }),
    );
    expect(failures).toEqual([]);
    expect(accepted).toBe(40);
    const votes = await app.client.vote.findMany({ where: { queueItem: { projectId: f.projectId } } });
    expect(votes).toHaveLength(40);
    expect(new Set(votes.map((v) => `${v.queueItemId}/${v.userId}`)).size).toBe(40);
    const states = await app.client.queueItem.groupBy({ by: ['state', 'outcome'], where: { projectId: f.projectId }, _count: { _all: true } });
    expect(states.map((s) => [s.state, s.outcome, s._count._all])).toEqual([['closed', 'kept', 20]]);
  });
});

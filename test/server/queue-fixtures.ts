// Fixtures for the queue and refit tests: a team with a lead, reviewers and an observer, one
// project with classes, samples (small random features) at revision 0, and queue items created
// directly (without a fit) so the consensus rules can be tested on their own.

import { mintTeamScope, type TeamScope } from '@/lib/server/authz/scope';
import type { Db } from '@/lib/server/db';
import { encodeFeatures } from '@/lib/server/features';
import type { Actor, Clock } from '@/lib/server/queue/context';
import type { Role } from '@/lib/domain';
import { DEFAULT_PROJECT_SETTINGS, type ProjectSettings } from '@/lib/domain-queue';

export type QueueFixture = {
  scope: TeamScope;
  teamId: string;
  projectId: string;
  lead: Actor;
  lead2: Actor;
  reviewers: Actor[];
  observer: Actor;
  sampleIds: string[];
  classes: string[];
};

export async function createQueueFixture(
  db: Db,
  options: { reviewers?: number; samples?: number; classes?: string[]; settings?: Partial<ProjectSettings>; features?: (i: number) => number[]; labels?: (i: number) => string } = {},
): Promise<QueueFixture> {
  const classes = options.classes ?? ['refund', 'shipping', 'account'];
  const reviewerCount = options.reviewers ?? 3;
  const sampleCount = options.samples ?? 12;
  const team = await db.team.create({ data: { name: `Team ${Math.random().toString(36).slice(2, 8)}` } });
  const mk = async (name: string, role: Role): Promise<Actor> => {
    const user = await db.user.create({ data: { email: `${name}-${team.id}@example.org`.toLowerCase(), name, passwordHash: 'x' } });
    await db.membership.create({ data: { teamId: team.id, userId: user.id, role } });
    return { userId: user.id, role };
  };
  const lead = await mk('Lead', 'lead');
  const lead2 = await mk('Second lead', 'lead');
  const reviewers: Actor[] = [];
  for (let i = 0; i < reviewerCount; i++) reviewers.push(await mk(`Reviewer ${i + 1}`, 'reviewer'));
  const observer = await mk('Observer', 'observer');
  const project = await db.project.create({
    data: {
      teamId: team.id,
      name: 'Queue test',
      featureCount: 2,
      settings: JSON.stringify({ ...DEFAULT_PROJECT_SETTINGS, ...options.settings }),
    },
  });
  await db.projectClass.createMany({ data: classes.map((name, position) => ({ projectId: project.id, name, position })) });
  await db.revision.create({ data: { projectId: project.id, number: 0, kind: 'import' } });
  const feats = options.features ?? ((i: number) => [i % 7, (i * 3) % 5]);
  const labels = options.labels ?? ((i: number) => classes[i % classes.length]);
  await db.sample.createMany({
    data: Array.from({ length: sampleCount }, (_, i) => ({
      projectId: project.id,
      externalId: `s${String(i).padStart(4, '0')}`,
      features: encodeFeatures(feats(i)),
      text: `Message number ${i}`,
      originalLabel: labels(i),
      currentLabel: labels(i),
    })),
  });
  const samples = await db.sample.findMany({ where: { projectId: project.id }, orderBy: { externalId: 'asc' }, select: { id: true } });
  return {
    scope: mintTeamScope(team.id),
    teamId: team.id,
    projectId: project.id,
    lead,
    lead2,
    reviewers,
    observer,
    sampleIds: samples.map((s) => s.id),
    classes,
  };
}

/** Open queue items for the given samples (suspicion descending in the given order). */
export async function createItems(db: Db, f: QueueFixture, sampleIds: string[] = f.sampleIds): Promise<string[]> {
  const ids: string[] = [];
  for (const [k, sampleId] of sampleIds.entries()) {
    const item = await db.queueItem.create({
      data: { projectId: f.projectId, sampleId, revisionNumber: 0, suspicion: 1 - k / (sampleIds.length + 1), reasons: 'wrong-side' },
    });
    ids.push(item.id);
  }
  return ids;
}

/** A clock the test moves by hand. */
export function manualClock(start = new Date('2030-01-01T09:00:00.000Z')): Clock & { advance: (ms: number) => void; set: (d: Date) => void } {
  let now = start.getTime();
  const clock = (() => new Date(now)) as Clock & { advance: (ms: number) => void; set: (d: Date) => void };
  clock.advance = (ms: number) => {
    now += ms;
  };
  clock.set = (d: Date) => {
    now = d.getTime();
  };
  return clock;
}

/** Expects `promise` to reject with an ActionError-like { status, message }. */
export async function refusedWith(promise: Promise<unknown>): Promise<{ status: number; message: string }> {
  try {
    await promise;
  } catch (e) {
    const status = typeof e === 'object' && e !== null && 'status' in e ? Number((e as { status: unknown }).status) : -1;
    return { status, message: e instanceof Error ? e.message : String(e) };
  }
  throw new Error('expected a refusal, but the call succeeded');
}

/**
 * Applying agreed relabels: closed items with outcome `relabelled` and no `appliedRevision` are
 * "pending changes". Applying them makes ONE new revision N+1 holding one LabelChange per item,
 * moves each sample's current label, stamps every item with `appliedRevision = N+1`, queues a
 * refit of revision N+1 — all in one transaction — and then nudges the fit worker.
 *
 * Batching rule: pending changes are applied automatically as soon as there are at least
 * `applyEvery` of them (project setting, default 10; checked after every vote or decision that
 * closes an item as relabelled), or whenever a lead applies them ("apply now"). With
 * `applyEvery = 0` only a lead applies.
 *
 * Each relabel lands in exactly one revision: the project row is locked first (so two applies
 * run one after the other), the pending items are then locked and re-read, and an item is
 * stamped only by a conditional update `WHERE appliedRevision IS NULL AND state = 'closed'` whose
 * count must match; LabelChange's unique (sampleId, revisionNumber) is the last line of defence.
 *
 * The rule never makes a vote wait for the project's lock on PostgreSQL. Whoever holds it — a
 * refit completing (it rebuilds the queue under that lock, up to a second or two on a 100k
 * project), another apply, a settings change — the rule takes the lock only if it is free
 * (`FOR NO KEY UPDATE SKIP LOCKED`), trying once more 30 ms later (brief holders); if it is still
 * taken, the vote returns and the rule is checked again in the background a little later
 * (`deferRule`, backing off up to DEFER_LIMIT_MS in all), by which time the holder has committed.
 * Measured before (issue "Running for a whole team", 20 reviewers on PostgreSQL during refits):
 * the closing votes that reached the rule waited for the lock, vote p95 750–940 ms on those votes.
 * Nothing depends on the background check alone: the changes stay pending (a lead sees them and
 * can apply them), and the next closing vote checks the rule again. On SQLite every write transaction waits its turn anyway (one writer per database),
 * so the rule applies in the vote's request as before.
 */
import { readProjectSettings } from '../../domain-queue';
import { roleAtLeast } from '../../domain';
import type { TeamScope } from '../authz/scope';
import { forbidden } from '../authz/errors';
import { Prisma, type DbTx } from '../db';
import { enqueueFitTx } from '../fits/enqueue';
import { notifyFitQueued } from '../fits/jobs';
import { nowOf, projectInScope, type Actor, type ProjectRow, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { lockRows, providerOf, writeTx } from './tx';
import { log } from '../log';

export interface AppliedBatch {
  readonly revisionNumber: number;
  readonly changeCount: number;
  readonly fitId: string;
  readonly itemIds: readonly string[];
  readonly trigger: 'rule' | 'lead';
}

export interface PendingChange {
  readonly itemId: string;
  readonly sampleId: string;
  readonly externalId: string;
  readonly fromLabel: string;
  readonly toLabel: string;
  readonly closedAt: Date | null;
  readonly decidedBy: 'consensus' | 'lead';
}

const pendingWhere = (projectId: string) => ({ projectId, state: 'closed', outcome: 'relabelled', appliedRevision: null });

export async function pendingChanges(deps: QueueDeps, scope: TeamScope, projectId: string): Promise<PendingChange[]> {
  const project = await projectInScope(deps.db, scope, projectId);
  const items = await deps.db.queueItem.findMany({
    where: pendingWhere(project.id),
    orderBy: [{ closedAt: 'asc' }, { id: 'asc' }],
    select: { id: true, sampleId: true, finalLabel: true, closedAt: true, tiebreakById: true, sample: { select: { externalId: true, currentLabel: true } } },
  });
  return items.map((i) => ({
    itemId: i.id,
    sampleId: i.sampleId,
    externalId: i.sample.externalId,
    fromLabel: i.sample.currentLabel,
    toLabel: i.finalLabel ?? i.sample.currentLabel,
    closedAt: i.closedAt,
    decidedBy: i.tiebreakById ? 'lead' : 'consensus',
  }));
}

/**
 * The samples' new labels, 500 per statement (`UPDATE … FROM (VALUES …)`, both databases): the
 * apply runs under the project's lock, which votes reaching the apply rule and a refit's completion
 * wait for, so it is kept to a handful of statements (one UPDATE and one INSERT per change took 20
 * round trips for a batch of ten).
 */
async function relabelSamples(tx: DbTx, sqlite: boolean, changes: readonly { sampleId: string; label: string }[], revision: number, now: Date): Promise<void> {
  for (let start = 0; start < changes.length; start += 500) {
    const rows = Prisma.join(changes.slice(start, start + 500).map((c) => Prisma.sql`(${c.sampleId}, ${c.label})`));
    if (sqlite) {
      await tx.$executeRaw`UPDATE "Sample" SET "currentLabel" = v.column2, "labelRevision" = ${revision}, "updatedAt" = ${now}
        FROM (VALUES ${rows}) AS v WHERE "Sample"."id" = v.column1`;
    } else {
      await tx.$executeRaw`UPDATE "Sample" AS s SET "currentLabel" = v.label, "labelRevision" = ${revision}, "updatedAt" = ${now}
        FROM (VALUES ${rows}) AS v(id, label) WHERE s."id" = v.id`;
    }
  }
}

async function applyInTx(
  tx: DbTx,
  sqlite: boolean,
  projectId: string,
  userId: string | null,
  trigger: AppliedBatch['trigger'],
  minimum: number,
  now: Date,
): Promise<AppliedBatch | null> {
  const project = await tx.project.findUnique({ where: { id: projectId }, select: { id: true, settings: true, currentRevision: true } });
  if (!project) return null;
  const candidates = await tx.queueItem.findMany({ where: pendingWhere(projectId), select: { id: true } });
  if (candidates.length === 0 || candidates.length < minimum) return null;
  // Lock the items (an undo of a closing vote may be racing), then re-read them.
  const ids = candidates.map((c) => c.id).sort();
  await lockRows(tx, ids.map((id) => ({ table: 'QueueItem' as const, id })), sqlite);
  const items = await tx.queueItem.findMany({
    where: { ...pendingWhere(projectId), id: { in: ids } },
    orderBy: [{ closedAt: 'asc' }, { id: 'asc' }],
    select: { id: true, sampleId: true, finalLabel: true, tiebreakById: true, sample: { select: { currentLabel: true } } },
  });
  if (items.length === 0 || items.length < minimum) return null;
  const number = project.currentRevision + 1;
  const changes = items.filter((i) => i.finalLabel !== null && i.finalLabel !== i.sample.currentLabel);
  if (changes.length === 0) {
    // The labels already are what the reviewers chose (changed meanwhile by an import): nothing
    // to record; the items count as applied in the current revision.
    await tx.queueItem.updateMany({ where: { id: { in: items.map((i) => i.id) } }, data: { appliedRevision: project.currentRevision } });
    return null;
  }
  const revision = await tx.revision.create({
    data: {
      projectId,
      number,
      kind: 'review',
      note: trigger === 'lead' ? 'Applied by a lead' : 'Applied by the apply rule',
      changeCount: changes.length,
      createdById: userId,
      createdAt: now,
    },
    select: { id: true, number: true },
  });
  await tx.labelChange.createMany({
    data: changes.map((item) => ({
      projectId,
      sampleId: item.sampleId,
      revisionId: revision.id,
      revisionNumber: number,
      fromLabel: item.sample.currentLabel,
      toLabel: item.finalLabel as string,
      queueItemId: item.id,
      decidedById: item.tiebreakById,
      createdAt: now,
    })),
  });
  await relabelSamples(tx, sqlite, changes.map((item) => ({ sampleId: item.sampleId, label: item.finalLabel as string })), number, now);
  const stamped = await tx.queueItem.updateMany({
    where: { ...pendingWhere(projectId), id: { in: items.map((i) => i.id) } },
    data: { appliedRevision: number },
  });
  if (stamped.count !== items.length) throw new Error(`apply: stamped ${stamped.count} of ${items.length} items`);
  await tx.project.update({ where: { id: projectId }, data: { currentRevision: number } });
  const fitId = await enqueueFitTx(tx, project, revision);
  return { revisionNumber: number, changeCount: changes.length, fitId, itemIds: items.map((i) => i.id), trigger };
}

async function applyAndNotify(
  deps: QueueDeps,
  projectId: string,
  userId: string | null,
  trigger: AppliedBatch['trigger'],
  minimum: number,
): Promise<AppliedBatch | null> {
  const batch = await writeTx(deps.db, [{ table: 'Project', id: projectId }], (tx) => applyInTx(tx, providerOf(deps.db) === 'sqlite', projectId, userId, trigger, minimum, nowOf(deps)));
  if (batch) await notifyFitQueued({ projectId, revisionNumber: batch.revisionNumber, fitId: batch.fitId });
  return batch;
}

/** A lead's "apply now": applies every pending change (null when there is none). */
export async function applyChanges(deps: QueueDeps, scope: TeamScope, actor: Actor, projectId: string): Promise<AppliedBatch | null> {
  if (!roleAtLeast(actor.role, 'lead')) throw forbidden(QUEUE_MESSAGES.leadOnlyApply);
  const project = await projectInScope(deps.db, scope, projectId);
  return applyAndNotify(deps, project.id, actor.userId, 'lead', 1);
}

/** The apply rule: applies when at least `applyEvery` changes are pending (0 = never). */
export async function maybeAutoApply(deps: QueueDeps, scope: TeamScope, projectId: string, userId: string | null): Promise<AppliedBatch | null> {
  return maybeAutoApplyInProject(deps, await projectInScope(deps.db, scope, projectId), userId);
}

/**
 * `maybeAutoApply` for a project row already read and checked against the caller's scope. Null
 * when nothing was applied, including when the project's lock was taken (PostgreSQL; the rule is
 * then checked again in the background, see the module comment).
 */
export async function maybeAutoApplyInProject(deps: QueueDeps, project: Pick<ProjectRow, 'id' | 'settings'>, userId: string | null): Promise<AppliedBatch | null> {
  // Brief holders (a fit being claimed, another apply, a follow-up pass being queued: a few to a
  // few tens of milliseconds) are waited out here: one more try after IN_REQUEST_PAUSES_MS[1].
  for (const pause of IN_REQUEST_PAUSES_MS) {
    if (pause > 0) await new Promise((r) => setTimeout(r, pause));
    const result = await ruleOnce(deps, project, userId);
    if (result !== 'busy') return result;
  }
  deferRule(deps, project, userId);
  return null;
}

/**
 * Waits before each try of the rule inside the vote's request (PostgreSQL, project locked). Each try
 * costs a count and a transaction: with four tries within 150 ms the votes that reached the rule
 * during refits took p95 595 ms (team load test), against 130 ms with one try; two tries keep the
 * brief holders from sending the rule to the background.
 */
const IN_REQUEST_PAUSES_MS = [0, 30] as const;

/** One check of the rule: the batch applied, null (nothing to apply), or 'busy' (PostgreSQL: the project's lock was held). */
async function ruleOnce(deps: QueueDeps, project: Pick<ProjectRow, 'id' | 'settings'>, userId: string | null): Promise<AppliedBatch | null | 'busy'> {
  const { applyEvery } = readProjectSettings(project.settings);
  if (applyEvery <= 0) return null;
  const pending = await deps.db.queueItem.count({ where: pendingWhere(project.id) });
  if (pending < applyEvery) return null;
  if (providerOf(deps.db) !== 'postgresql') return applyAndNotify(deps, project.id, userId, 'rule', applyEvery);
  const batch = await writeTx(deps.db, [], async (tx) => {
    const locked = await tx.$queryRaw<{ id: string }[]>`SELECT "id" FROM "Project" WHERE "id" = ${project.id} FOR NO KEY UPDATE SKIP LOCKED`;
    if (locked.length === 0) return 'busy' as const;
    return applyInTx(tx, false, project.id, userId, 'rule', applyEvery, nowOf(deps));
  });
  if (batch !== 'busy' && batch) await notifyFitQueued({ projectId: project.id, revisionNumber: batch.revisionNumber, fitId: batch.fitId });
  return batch;
}

/** First wait of a deferred check; each further one doubles, up to DEFER_STEP_MAX_MS. */
const DEFER_FIRST_MS = 100;
const DEFER_STEP_MAX_MS = 2_000;
/** A deferred check gives up after about this long (the changes stay pending, see above). */
const DEFER_LIMIT_MS = 30_000;

const deferredHolder = globalThis as typeof globalThis & { __borderlineDeferredRule?: Map<string, Promise<void>> };
function deferredChecks(): Map<string, Promise<void>> {
  return (deferredHolder.__borderlineDeferredRule ??= new Map());
}

/** Checks the rule again in the background until it applied, found too few changes, or DEFER_LIMIT_MS passed; one such check per project at a time. */
function deferRule(deps: QueueDeps, project: Pick<ProjectRow, 'id' | 'settings'>, userId: string | null): void {
  const checks = deferredChecks();
  if (checks.has(project.id)) return;
  const run = (async () => {
    for (let waited = 0, step = DEFER_FIRST_MS; waited < DEFER_LIMIT_MS; waited += step, step = Math.min(DEFER_STEP_MAX_MS, step * 2)) {
      await new Promise((r) => setTimeout(r, step));
      // The settings as they are now (the rule may have been changed meanwhile); gone: nothing to do.
      const now = await deps.db.$queryRaw<{ id: string; settings: string }[]>`SELECT "id", "settings" FROM "Project" WHERE "id" = ${project.id}`;
      if (now.length === 0 || (await ruleOnce(deps, now[0], userId)) !== 'busy') return;
    }
    log.warn('apply rule: the project stayed locked; its pending changes wait for the next closing vote or a lead', { projectId: project.id });
  })()
    .catch((e: unknown) => log.warn('apply rule: background check failed; its pending changes wait for the next closing vote or a lead', { projectId: project.id, error: e }))
    .finally(() => checks.delete(project.id));
  checks.set(project.id, run);
}

/** Resolves when every background check of the rule started by this process has finished (tests). */
export async function settleDeferredApplies(): Promise<void> {
  const checks = deferredChecks();
  while (checks.size > 0) await Promise.all([...checks.values()]);
}

/**
 * What the queue screens read: the item a reviewer works on, the split items and pending changes a
 * lead sees, recent decisions, and the project's queue and fit status. Team-scoped like every
 * data-access function (the scope is checked against the project first).
 *
 * Blindness: `itemForReviewer` never includes votes or the item's state (whether someone voted
 * before is not shown either). Votes become visible only on split items, to leads who decide them,
 * and as outcomes once an item is closed.
 */
import { readProjectSettings, STANDING_FLAGS, type StandingFlag } from '../../domain-queue';
import { roleAtLeast } from '../../domain';
import type { TeamScope } from '../authz/scope';
import { forbidden, notFound } from '../authz/errors';
import { Prisma, type Db } from '../db';
import { dataRevisionKeyColumns, featureMatrixForReading, formatDataRevisionKey, type FeatureMatrix } from '../fits/data';
import { unpackDetail } from '../fits/standings-store';
import { pendingChanges } from './apply';
import { nowOf, projectInScope, type Actor, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { type Scaling } from './neighbours';
import { neighboursOfRow, prefetchNeighbours } from './neighbour-service';
import { describeStanding, type StandingWords } from './words';
import { record, traced } from '../trace';

export interface StandingView extends StandingWords {
  readonly fitId: string;
  readonly fitRevision: number;
  readonly flags: StandingFlag[];
  readonly margin: number;
  readonly distance: number;
  readonly suspicion: number;
  readonly nearBand: number;
}

export interface NeighbourView {
  readonly sampleId: string;
  readonly externalId: string;
  readonly label: string;
  readonly distance: number;
  readonly text: string | null;
}

export interface SampleView {
  readonly id: string;
  readonly externalId: string;
  readonly text: string | null;
  readonly imageRef: string | null;
  readonly metadata: [string, string][];
  readonly currentLabel: string;
  readonly labelRevision: number;
}

export interface ReviewItemView {
  readonly itemId: string;
  readonly round: number;
  readonly reasons: string[];
  readonly suspicion: number;
  readonly leaseExpiresAt: string | null;
  readonly sample: SampleView;
  readonly classes: string[];
  readonly standing: StandingView | null;
  /** null: the search was not done within the caller's wait (QueueDeps.neighbourWaitMs); asking for the item again returns them */
  readonly neighbours: NeighbourView[] | null;
}

const metricsCache = new Map<string, { classes: string[]; nearBand: number }>();

async function fitFacts(db: Db, fitId: string, fallbackNearBand: number): Promise<{ classes: string[]; nearBand: number }> {
  const hit = metricsCache.get(fitId);
  if (hit) return hit;
  const fit = await db.fit.findUnique({ where: { id: fitId }, select: { metrics: true } });
  let classes: string[] = [];
  let nearBand = fallbackNearBand;
  try {
    const m = JSON.parse(fit?.metrics ?? '{}') as { classes?: unknown; nearBand?: unknown };
    if (Array.isArray(m.classes)) classes = m.classes.filter((c): c is string => typeof c === 'string');
    if (typeof m.nearBand === 'number') nearBand = m.nearBand;
  } catch {
    classes = [];
  }
  const facts = { classes, nearBand };
  if (metricsCache.size > 200) metricsCache.clear();
  metricsCache.set(fitId, facts);
  return facts;
}

function flagsOf(csv: string): StandingFlag[] {
  return csv.split(',').filter((f): f is StandingFlag => (STANDING_FLAGS as readonly string[]).includes(f));
}

function metadataOf(json: string | null): [string, string][] {
  if (!json) return [];
  try {
    const v: unknown = JSON.parse(json);
    if (!v || typeof v !== 'object' || Array.isArray(v)) return [];
    return Object.entries(v as Record<string, unknown>)
      .slice(0, 30)
      .map(([k, x]) => [k, typeof x === 'string' ? x : JSON.stringify(x)] as [string, string]);
  } catch {
    return [];
  }
}

interface StandingRow {
  readonly fitId: string;
  readonly margin: number;
  readonly distance: number;
  readonly flags: string;
  readonly suspicion: number;
  readonly detail: Uint8Array | null;
  readonly revisionNumber: number | bigint;
}

/** Fit.createdAt by fit id: it never changes, so it is read once per fit. */
const createdAtCache = new Map<string, number>();

async function fitCreatedAt(db: Db, fitId: string): Promise<number> {
  const hit = createdAtCache.get(fitId);
  if (hit !== undefined) return hit;
  const rows = await db.$queryRaw<{ createdAt: Date | string }[]>`SELECT "createdAt" FROM "Fit" WHERE "id" = ${fitId}`;
  const at = rows[0] ? new Date(rows[0].createdAt).getTime() : 0;
  if (createdAtCache.size > 10_000) createdAtCache.clear();
  createdAtCache.set(fitId, at);
  return at;
}

/** The stored standings (`StandingRow` columns) of the sample given by the SQL expression `sampleId`, in done fits only. */
function doneStandingsOfSql(sampleId: Prisma.Sql): Prisma.Sql {
  return Prisma.sql`SELECT st."fitId", st."margin", st."distance", st."flags", st."suspicion", st."detail", f."revisionNumber"
    FROM "Standing" st JOIN "Fit" f ON f."id" = st."fitId"
    WHERE st."sampleId" = ${sampleId} AND f."status" = 'done'`;
}

/**
 * The newest stored standing of a sample among done fits, in words: highest revision, then the fit
 * requested last. Raw SQL, like the other reads on the "next" path (the ORM's cost per one-row read
 * on the server thread was several times the database's).
 *
 * The query reads only Fit columns stored before `Fit.model`: on SQLite a column stored after that
 * blob (such as createdAt) is reached by walking the blob's overflow pages, milliseconds per fit row.
 * A sample has a standing in a handful of fits; the createdAt tie-break between two fits of the same
 * revision (a quick pass and its follow-up full pass) comes from a per-fit memory.
 */
export async function standingOf(db: Db, sampleId: string, label: string, fallbackNearBand: number): Promise<StandingView | null> {
  const rows = await db.$queryRaw<StandingRow[]>(doneStandingsOfSql(Prisma.sql`${sampleId}`));
  let st: StandingRow | undefined;
  for (const r of rows) {
    if (!st || Number(r.revisionNumber) > Number(st.revisionNumber)) st = r;
    else if (Number(r.revisionNumber) === Number(st.revisionNumber) && (await fitCreatedAt(db, r.fitId)) > (await fitCreatedAt(db, st.fitId))) st = r;
  }
  return st ? standingViewOf(db, st, label, fallbackNearBand) : null;
}

/** A stored standing row in words, with its fit's class list and near band (cached per fit). */
async function standingViewOf(db: Db, st: StandingRow, label: string, fallbackNearBand: number): Promise<StandingView | null> {
  const facts = await fitFacts(db, st.fitId, fallbackNearBand);
  const detail = unpackDetail(st.detail);
  const flags = flagsOf(st.flags);
  if (!detail || facts.classes.length < 2) return null;
  const words = describeStanding({
    label,
    classes: facts.classes,
    decisions: detail.decision,
    oofDecisions: detail.oofDecision,
    flags,
    nearBand: facts.nearBand,
  });
  return {
    ...words,
    fitId: st.fitId,
    fitRevision: Number(st.revisionNumber),
    flags,
    margin: st.margin,
    distance: st.distance,
    suspicion: st.suspicion,
    nearBand: facts.nearBand,
  };
}

/** `search`'s result, or null when it takes longer than `ms` (it goes on; errors are dropped then). */
async function within<T>(search: Promise<T>, ms: number): Promise<T | null> {
  let timer: ReturnType<typeof setTimeout> | undefined;
  const late = new Promise<null>((resolve) => (timer = setTimeout(() => resolve(null), ms)));
  try {
    return await Promise.race([search, late]);
  } finally {
    clearTimeout(timer);
    search.catch(() => undefined);
  }
}

async function neighboursOf(db: Db, m: FeatureMatrix, sampleId: string, scaling: Scaling, waitMs: number | undefined): Promise<NeighbourView[] | null> {
  const row = m.rowOf.get(sampleId);
  if (row === undefined) return [];
  const search = neighboursOfRow(m, scaling, row);
  const found = waitMs === undefined ? await search : await within(search, waitMs);
  if (found === null) {
    record('next.neighboursLater', 0);
    return null;
  }
  const ids = found.map((x) => m.sampleIds[x.row]);
  if (ids.length === 0) return [];
  const samples = await db.$queryRaw<{ id: string; externalId: string; currentLabel: string; text: string | null }[]>`
    SELECT "id", "externalId", "currentLabel", "text" FROM "Sample" WHERE "id" IN (${Prisma.join(ids)})`;
  const byId = new Map(samples.map((s) => [s.id, s]));
  return found.flatMap((x) => {
    const s = byId.get(m.sampleIds[x.row]);
    if (!s) return [];
    return [{ sampleId: s.id, externalId: s.externalId, label: s.currentLabel, distance: x.distance, text: s.text ? s.text.slice(0, 160) : null }];
  });
}

const sampleSelect = { id: true, externalId: true, text: true, imageRef: true, metadata: true, currentLabel: true, labelRevision: true } as const;

async function sampleView(db: Db, projectId: string, sampleId: string): Promise<SampleView> {
  const s = await db.sample.findFirst({ where: { id: sampleId, projectId }, select: sampleSelect });
  if (!s) throw notFound();
  return { ...s, metadata: metadataOf(s.metadata) };
}

async function classNames(db: Db, projectId: string): Promise<string[]> {
  const rows = await db.$queryRaw<{ name: string }[]>`SELECT "name" FROM "ProjectClass" WHERE "projectId" = ${projectId} ORDER BY "position" ASC`;
  return rows.map((c) => c.name);
}

/**
 * A project's class list by (project, data revision key): classes are only ever added, by an
 * import, in the transaction that makes the import's revision (lib/server/import/apply.ts), so a
 * list read at one data revision stays right until the key changes. Saves "next" a round trip.
 */
const classCache = new Map<string, { key: string; classes: string[] }>();

async function classNamesAt(db: Db, projectId: string, revisionKey: string): Promise<string[]> {
  const hit = classCache.get(projectId);
  if (hit && hit.key === revisionKey) return hit.classes;
  const classes = await classNames(db, projectId);
  if (classCache.size > 1000) classCache.clear();
  classCache.set(projectId, { key: revisionKey, classes });
  return classes;
}

/**
 * How many of the next items a prefetch searches ahead, and how often per project at most. Far
 * ahead: neighbours depend on the features only, so a search done once serves every later claim of
 * the item, across refits; rows already cached or under way are not searched again.
 */
const PREFETCH_ITEMS = 500;
const PREFETCH_EVERY_MS = 2000;
const prefetchHolder = globalThis as typeof globalThis & { __borderlinePrefetchAt?: Map<string, number> };

/**
 * Searches neighbours ahead for the items "next" is likely to hand out, in the order it hands them
 * out. At most every PREFETCH_EVERY_MS per project: with many reviewers every "next" would otherwise
 * repeat the same read of the queue.
 */
async function prefetchUpcoming(db: Db, m: FeatureMatrix, scaling: Scaling, now: Date): Promise<void> {
  const last = (prefetchHolder.__borderlinePrefetchAt ??= new Map());
  const at = Date.now();
  if (at - (last.get(m.projectId) ?? 0) < PREFETCH_EVERY_MS) return;
  last.set(m.projectId, at);
  // The items "next" hands out next: awaiting votes and not under someone's live lease.
  const upcoming = await db.queueItem.findMany({
    where: { projectId: m.projectId, state: { in: ['open', 'one-vote'] }, OR: [{ leaseUserId: null }, { leaseExpiresAt: { lte: now } }] },
    orderBy: [{ state: 'asc' }, { suspicion: 'desc' }, { id: 'asc' }],
    take: PREFETCH_ITEMS,
    select: { sampleId: true },
  });
  const rows = upcoming.map((u) => m.rowOf.get(u.sampleId)).filter((r): r is number => r !== undefined);
  prefetchNeighbours(m, scaling, rows);
}

/** A row of the reviewer screen's item read (`reviewItemSql`). */
export interface ItemRow {
  readonly id: string;
  readonly round: number | bigint;
  readonly reasons: string;
  readonly suspicion: number;
  readonly leaseUserId: string | null;
  /** a Date, or the stored text on drivers that return it as such */
  readonly leaseExpiresAt: Date | string | null;
  readonly sampleId: string;
  readonly externalId: string;
  readonly text: string | null;
  readonly imageRef: string | null;
  readonly metadata: string | null;
  readonly currentLabel: string;
  readonly labelRevision: number | bigint;
  readonly settings: string;
  readonly dataRevisionNumber: number | bigint | null;
  /** a Date, or what the driver returns for a column read through a sub-select */
  readonly dataRevisionAt: Date | string | number | null;
}

/** An item row with the sample's newest standing (`st*` columns, all null when it has none): PostgreSQL's claim statement. */
export interface ItemRowWithStanding extends ItemRow {
  readonly stFitId: string | null;
  readonly stMargin: number | null;
  readonly stDistance: number | null;
  readonly stFlags: string | null;
  readonly stSuspicion: number | null;
  readonly stDetail: Uint8Array | null;
  readonly stRevisionNumber: number | bigint | null;
}

/**
 * The item read of the reviewer screen as one SELECT: the queue item (from `items`, a relation with
 * QueueItem's columns — the table itself, or the rows a claim statement just updated), its sample,
 * the project's settings and the project's data revision key (which says whether the cached
 * feature matrix and class list are current), filtered by `where` over `q`, `s` and `p`.
 */
export function reviewItemSql(items: Prisma.Sql, where: Prisma.Sql): Prisma.Sql {
  return Prisma.sql`SELECT q."id", q."round", q."reasons", q."suspicion", q."leaseUserId", q."leaseExpiresAt", q."sampleId",
        s."externalId", s."text", s."imageRef", s."metadata", s."currentLabel", s."labelRevision", p."settings",
        ${dataRevisionKeyColumns(Prisma.sql`q."projectId"`)}
      FROM ${items} q JOIN "Sample" s ON s."id" = q."sampleId" JOIN "Project" p ON p."id" = q."projectId"
      WHERE ${where}`;
}

/**
 * PostgreSQL only (LATERAL): `reviewItemSql` with the sample's newest standing among done fits —
 * highest revision, then the newer fit — as `st*` columns, so that "next" reads the item and its
 * standing in its claim statement. (SQLite has no LATERAL, and there Fit.createdAt sits behind the
 * model blob: `standingOf` picks the fit in code.)
 */
export function reviewItemWithStandingSql(items: Prisma.Sql): Prisma.Sql {
  return Prisma.sql`SELECT i.*, st."fitId" AS "stFitId", st."margin" AS "stMargin", st."distance" AS "stDistance",
        st."flags" AS "stFlags", st."suspicion" AS "stSuspicion", st."detail" AS "stDetail", st."revisionNumber" AS "stRevisionNumber"
      FROM (${reviewItemSql(items, Prisma.sql`TRUE`)}) i
      LEFT JOIN LATERAL (
        ${doneStandingsOfSql(Prisma.sql`i."sampleId"`)}
        ORDER BY f."revisionNumber" DESC, f."createdAt" DESC LIMIT 1) st ON TRUE`;
}

/** The standing columns of an `ItemRowWithStanding`: the row `standingOf` would have picked, or null. */
function standingColumns(row: ItemRowWithStanding): StandingRow | null {
  if (row.stFitId === null) return null;
  return {
    fitId: row.stFitId,
    margin: Number(row.stMargin),
    distance: Number(row.stDistance),
    flags: row.stFlags ?? '',
    suspicion: Number(row.stSuspicion),
    detail: row.stDetail,
    revisionNumber: row.stRevisionNumber ?? 0,
  };
}

/**
 * The item the caller holds the lease on, as the reviewer screen shows it (no votes).
 *
 * One statement reads the item (`reviewItemSql`), checked against the caller's scope (an item of
 * another team's project is "not found"). The standing and the neighbours are then read side by
 * side: two sequential round trips after the claim, three statements in all (the class list is
 * read again only after an import). On PostgreSQL "next" reads the item and its standing in the
 * claim statement itself and goes straight to `reviewItemFromRow`.
 */
export async function itemForReviewer(deps: QueueDeps, scope: TeamScope, actor: Actor, projectId: string, itemId: string): Promise<ReviewItemView> {
  const rows = await traced('view.item', () =>
    deps.db.$queryRaw<ItemRow[]>(reviewItemSql(Prisma.sql`"QueueItem"`, Prisma.sql`q."id" = ${itemId} AND q."projectId" = ${projectId} AND p."teamId" = ${scope.teamId}`)),
  );
  const item = rows[0];
  if (!item) throw notFound();
  return reviewItemFromRow(deps, actor, projectId, item);
}

/**
 * The reviewer screen's view of an item row: the class list (cached per data revision), the
 * standing (from the row when it carries one, else `standingOf`) and the neighbours (feature matrix
 * and search, each from memory or within the caller's wait) side by side.
 */
export async function reviewItemFromRow(deps: QueueDeps, actor: Actor, projectId: string, item: ItemRow | ItemRowWithStanding): Promise<ReviewItemView> {
  const { db } = deps;
  const revisionKey = formatDataRevisionKey(item.dataRevisionNumber, item.dataRevisionAt);
  const settings = readProjectSettings(item.settings);
  const sample: SampleView = {
    id: item.sampleId,
    externalId: item.externalId,
    text: item.text,
    imageRef: item.imageRef,
    metadata: metadataOf(item.metadata),
    currentLabel: item.currentLabel,
    labelRevision: Number(item.labelRevision),
  };
  const standingRead = (): Promise<StandingView | null> => {
    if (!('stFitId' in item)) return standingOf(db, item.sampleId, sample.currentLabel, settings.nearBand);
    const st = standingColumns(item);
    return st ? standingViewOf(db, st, sample.currentLabel, settings.nearBand) : Promise.resolve(null);
  };
  // The neighbours need the feature matrix; with a wait budget (the screen) neither its read nor
  // the search holds the answer up past the budget (QueueDeps.neighbourWaitMs).
  const waitMs = deps.neighbourWaitMs;
  const deadline = performance.now() + (waitMs ?? 0);
  const neighboursRead = async (): Promise<NeighbourView[] | null> => {
    const read = (deps.featureMatrix ?? featureMatrixForReading)(db, projectId, revisionKey);
    const matrix = await traced('view.matrix', () => (waitMs === undefined ? read : within(read, waitMs)));
    if (matrix === null) {
      record('next.matrixLater', 0);
      return null;
    }
    void prefetchUpcoming(db, matrix, settings.scale, nowOf(deps)).catch(() => undefined);
    return neighboursOf(db, matrix, item.sampleId, settings.scale, waitMs === undefined ? undefined : Math.max(0, deadline - performance.now()));
  };
  const [classes, standing, neighbours] = await Promise.all([
    traced('view.classes', () => classNamesAt(db, projectId, revisionKey)),
    traced('view.standing', standingRead),
    traced('view.neighbours', neighboursRead),
  ]);
  return {
    itemId: item.id,
    round: Number(item.round),
    reasons: item.reasons ? item.reasons.split(',') : [],
    suspicion: item.suspicion,
    leaseExpiresAt: item.leaseUserId === actor.userId && item.leaseExpiresAt !== null ? new Date(item.leaseExpiresAt).toISOString() : null,
    sample,
    classes,
    standing,
    neighbours,
  };
}

export interface SplitItemView {
  readonly itemId: string;
  readonly sample: SampleView;
  readonly standing: StandingView | null;
  readonly votes: { userId: string; name: string; decision: string; label: string | null; note: string | null }[];
  /** true when the caller cast one of the votes (then another lead must decide) */
  readonly callerVoted: boolean;
}

/** Split items with their two votes — for leads only. */
export async function splitItems(deps: QueueDeps, scope: TeamScope, actor: Actor, projectId: string, limit = 20): Promise<SplitItemView[]> {
  if (!roleAtLeast(actor.role, 'lead')) throw forbidden(QUEUE_MESSAGES.leadOnlyDecide);
  const { db } = deps;
  const project = await projectInScope(db, scope, projectId);
  const settings = readProjectSettings(project.settings);
  const items = await db.queueItem.findMany({
    where: { projectId: project.id, state: 'split' },
    orderBy: [{ suspicion: 'desc' }, { id: 'asc' }],
    take: limit,
    select: {
      id: true,
      sampleId: true,
      votes: { orderBy: { createdAt: 'asc' }, select: { userId: true, decision: true, label: true, note: true, user: { select: { name: true } } } },
    },
  });
  const out: SplitItemView[] = [];
  for (const it of items) {
    const sample = await sampleView(db, project.id, it.sampleId);
    out.push({
      itemId: it.id,
      sample,
      standing: await standingOf(db, it.sampleId, sample.currentLabel, settings.nearBand),
      votes: it.votes.map((v) => ({ userId: v.userId, name: v.user.name, decision: v.decision, label: v.label, note: v.note })),
      callerVoted: it.votes.some((v) => v.userId === actor.userId),
    });
  }
  return out;
}

export interface DecisionView {
  readonly itemId: string;
  readonly externalId: string;
  readonly outcome: string;
  readonly finalLabel: string | null;
  readonly currentLabel: string;
  readonly appliedRevision: number | null;
  readonly closedAt: string | null;
  readonly byLead: boolean;
  readonly standing: { headline: string; fitRevision: number } | null;
}

/** The most recently closed items with the sample's newest standing (after a refit: its new one). */
export async function recentDecisions(deps: QueueDeps, scope: TeamScope, projectId: string, limit = 8): Promise<DecisionView[]> {
  const { db } = deps;
  const project = await projectInScope(db, scope, projectId);
  const settings = readProjectSettings(project.settings);
  const items = await db.queueItem.findMany({
    where: { projectId: project.id, state: 'closed' },
    orderBy: [{ closedAt: 'desc' }, { id: 'desc' }],
    take: limit,
    select: {
      id: true,
      outcome: true,
      finalLabel: true,
      appliedRevision: true,
      closedAt: true,
      tiebreakById: true,
      sampleId: true,
      sample: { select: { externalId: true, currentLabel: true } },
    },
  });
  const out: DecisionView[] = [];
  for (const it of items) {
    const st = await standingOf(db, it.sampleId, it.sample.currentLabel, settings.nearBand);
    out.push({
      itemId: it.id,
      externalId: it.sample.externalId,
      outcome: it.outcome ?? 'kept',
      finalLabel: it.finalLabel,
      currentLabel: it.sample.currentLabel,
      appliedRevision: it.appliedRevision,
      closedAt: it.closedAt ? it.closedAt.toISOString() : null,
      byLead: it.tiebreakById !== null,
      standing: st ? { headline: st.headline, fitRevision: st.fitRevision } : null,
    });
  }
  return out;
}

export interface FitStatusView {
  readonly id: string;
  readonly status: string;
  readonly revisionNumber: number;
  readonly progress: number;
  readonly pass: string | null;
  readonly error: string | null;
  readonly finishedAt: string | null;
}

export interface QueueStatusView {
  readonly currentRevision: number;
  /** the fit being computed (running, else queued), if any */
  readonly working: FitStatusView | null;
  /** the newest completed fit */
  readonly current: FitStatusView | null;
  readonly counts: { open: number; oneVote: number; split: number; closed: number; kept: number; relabelled: number; pending: number };
  readonly reviewing: { userId: string; name: string }[];
  readonly applyEvery: number;
  readonly generatedAt: string;
}

function fitView(f: { id: string; status: string; revisionNumber: number; progress: number; metrics: string | null; error: string | null; finishedAt: Date | null } | null): FitStatusView | null {
  if (!f) return null;
  let pass: string | null = null;
  try {
    const m = JSON.parse(f.metrics ?? '{}') as { pass?: unknown };
    pass = typeof m.pass === 'string' ? m.pass : null;
  } catch {
    pass = null;
  }
  return { id: f.id, status: f.status, revisionNumber: f.revisionNumber, progress: f.progress, pass, error: f.error, finishedAt: f.finishedAt ? f.finishedAt.toISOString() : null };
}

/**
 * The project's newest done fit (highest revision, then requested last) without ordering every done
 * fit by createdAt: on SQLite that column lies after the model blob (see standingOf), and a project
 * keeps every fit it ever ran.
 */
async function newestDoneFitId(db: Db, projectId: string): Promise<string | null> {
  const top = await db.$queryRaw<{ id: string }[]>`
    SELECT "id" FROM "Fit" WHERE "projectId" = ${projectId} AND "status" = 'done' AND "revisionNumber" = (
      SELECT MAX("revisionNumber") FROM "Fit" WHERE "projectId" = ${projectId} AND "status" = 'done')`;
  let best: { id: string; at: number } | null = null;
  for (const f of top) {
    const at = await fitCreatedAt(db, f.id);
    if (!best || at > best.at) best = { id: f.id, at };
  }
  return best?.id ?? null;
}

/** Fit status, queue progress by state and who holds a lease now. */
export async function queueStatus(deps: QueueDeps, scope: TeamScope, projectId: string): Promise<QueueStatusView> {
  const { db } = deps;
  const project = await projectInScope(db, scope, projectId);
  const now = nowOf(deps);
  const fitSelect = { id: true, status: true, revisionNumber: true, progress: true, metrics: true, error: true, finishedAt: true } as const;
  const [working, current, groups, pending, leases] = await Promise.all([
    db.fit.findFirst({
      where: { projectId: project.id, status: { in: ['running', 'queued'] } },
      orderBy: [{ status: 'asc' }, { revisionNumber: 'desc' }, { createdAt: 'desc' }],
      select: fitSelect,
    }),
    newestDoneFitId(db, project.id).then((id) => (id ? db.fit.findUnique({ where: { id }, select: fitSelect }) : null)),
    db.queueItem.groupBy({ by: ['state', 'outcome'], where: { projectId: project.id }, _count: { _all: true } }),
    db.queueItem.count({ where: { projectId: project.id, state: 'closed', outcome: 'relabelled', appliedRevision: null } }),
    db.queueItem.findMany({
      where: { projectId: project.id, leaseExpiresAt: { gt: now }, leaseUserId: { not: null } },
      select: { leaseUser: { select: { id: true, name: true } } },
    }),
  ]);
  const counts = { open: 0, oneVote: 0, split: 0, closed: 0, kept: 0, relabelled: 0, pending };
  for (const g of groups) {
    const c = g._count._all;
    if (g.state === 'open') counts.open += c;
    else if (g.state === 'one-vote') counts.oneVote += c;
    else if (g.state === 'split') counts.split += c;
    else if (g.state === 'closed') {
      counts.closed += c;
      if (g.outcome === 'relabelled') counts.relabelled += c;
      else counts.kept += c;
    }
  }
  const reviewers = new Map<string, string>();
  for (const l of leases) if (l.leaseUser) reviewers.set(l.leaseUser.id, l.leaseUser.name);
  return {
    currentRevision: project.currentRevision,
    // 'queued' sorts after 'running' (status asc), so a running fit is shown first.
    working: fitView(working),
    current: fitView(current),
    counts,
    reviewing: [...reviewers].map(([userId, name]) => ({ userId, name })).sort((a, b) => a.name.localeCompare(b.name)),
    applyEvery: readProjectSettings(project.settings).applyEvery,
    generatedAt: now.toISOString(),
  };
}

export interface PendingChangeView {
  readonly itemId: string;
  readonly externalId: string;
  readonly fromLabel: string;
  readonly toLabel: string;
  readonly closedAt: string | null;
  readonly decidedBy: 'consensus' | 'lead';
}

/** Everything the queue screen polls (route GET /api/projects/[projectId]/status). */
export interface QueueBoard {
  readonly status: QueueStatusView;
  readonly recent: DecisionView[];
  /** leads only */
  readonly lead: { readonly splits: SplitItemView[]; readonly pending: PendingChangeView[] } | null;
}

export async function queueBoard(deps: QueueDeps, scope: TeamScope, actor: Actor, projectId: string): Promise<QueueBoard> {
  const isLead = roleAtLeast(actor.role, 'lead');
  const [status, recent, splits, pending] = await Promise.all([
    queueStatus(deps, scope, projectId),
    recentDecisions(deps, scope, projectId),
    isLead ? splitItems(deps, scope, actor, projectId) : Promise.resolve(null),
    isLead ? pendingChangeList(deps, scope, projectId) : Promise.resolve(null),
  ]);
  return { status, recent, lead: splits && pending ? { splits, pending } : null };
}

async function pendingChangeList(deps: QueueDeps, scope: TeamScope, projectId: string): Promise<PendingChangeView[]> {
  const list = await pendingChanges(deps, scope, projectId);
  return list.map((p) => ({
    itemId: p.itemId,
    externalId: p.externalId,
    fromLabel: p.fromLabel,
    toLabel: p.toLabel,
    closedAt: p.closedAt ? p.closedAt.toISOString() : null,
    decidedBy: p.decidedBy,
  }));
}

/** Name and classes of a project, for the queue and settings screens. */
export async function queueProjectHeader(deps: QueueDeps, scope: TeamScope, projectId: string): Promise<{ name: string; classes: string[]; settings: ReturnType<typeof readProjectSettings> }> {
  const project = await projectInScope(deps.db, scope, projectId);
  return { name: project.name, classes: await classNames(deps.db, project.id), settings: readProjectSettings(project.settings) };
}

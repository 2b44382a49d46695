/**
 * Reading a project's samples for the engine.
 *
 * Feature vectors change only through imports (new samples, or an update import rewriting existing
 * ones), and every import makes a revision of kind `import` or `update`; review revisions change
 * labels only. So the decoded matrix of a project is kept in memory (`featureMatrix`) and reused
 * by every refit and every nearest-neighbour lookup, and re-read when the project's sample count,
 * its newest sample, or its newest non-review revision changes. `invalidateFeatureCache(projectId)`
 * forces a re-read. The matrix lives in a SharedArrayBuffer, so handing it to the engine's worker
 * thread does not copy 4·n·d bytes.
 *
 * Labels are read per revision: the label of a sample at revision N is its current label, unless a
 * LabelChange of a later revision exists, in which case it is the `fromLabel` of the earliest such
 * change. Samples added after revision N are left out.
 */
import { Prisma, type Db, type DbTx } from '../db';
import { decodeFeaturesInto } from '../features';

export interface FeatureMatrix {
  readonly projectId: string;
  /** Sample.id per row, ascending. */
  readonly sampleIds: readonly string[];
  readonly externalIds: readonly string[];
  readonly addedRevision: Int32Array;
  /** row-major rows × cols, backed by a SharedArrayBuffer */
  readonly X: Float32Array;
  readonly rows: number;
  readonly cols: number;
  readonly rowOf: ReadonlyMap<string, number>;
  readonly fingerprint: string;
}

type Cached = { matrix: FeatureMatrix; usedAt: number; bytes: number };
const store = globalThis as typeof globalThis & { __borderlineFeatureCache?: Map<string, Cached> };
function cache(): Map<string, Cached> {
  store.__borderlineFeatureCache ??= new Map();
  return store.__borderlineFeatureCache;
}

/** Upper bound of cached feature bytes in this process (least recently used projects go first). */
export const FEATURE_CACHE_BYTES = 1_200_000_000;

export function invalidateFeatureCache(projectId?: string): void {
  if (projectId === undefined) cache().clear();
  else cache().delete(projectId);
}

async function fingerprintOf(client: Db | DbTx, projectId: string): Promise<{ key: string; count: number }> {
  const [agg, dataRevision] = await Promise.all([
    client.sample.aggregate({ where: { projectId }, _count: { _all: true }, _max: { createdAt: true } }),
    dataRevisionKey(client, projectId),
  ]);
  const count = agg._count._all;
  return { key: `${count}:${agg._max.createdAt?.getTime() ?? 0}:${dataRevision}`, count };
}

/**
 * Rows per read of the features (about 1 MB at 256 columns). Reads through the SQLite driver are
 * synchronous on the calling thread: between pages the reader yields to the event loop, so that a
 * reload after an import (or a first refit) never holds up the requests answered meanwhile for
 * more than one page.
 */
const PAGE = 1000;
/** Rows per read of the labels (three short columns). */
const LABEL_PAGE = 10_000;

/** Lets requests waiting on this thread's event loop through during long main-thread loops. */
export const yieldToEventLoop = () => new Promise<void>((resolve) => setImmediate(resolve));

/**
 * The cheap part of the fingerprint: the newest import / update revision of the project. Raw SQL:
 * every "next" reads it (a one-row read through the ORM cost several times the database's time).
 */
export async function dataRevisionKey(client: Db | DbTx, projectId: string): Promise<string> {
  const rows = await client.$queryRaw<{ number: number | bigint; createdAt: Date | string }[]>`
    SELECT "number", "createdAt" FROM "Revision" WHERE "projectId" = ${projectId} AND "kind" <> 'review' ORDER BY "number" DESC LIMIT 1`;
  const r = rows[0];
  return formatDataRevisionKey(r?.number ?? null, r?.createdAt ?? null);
}

/**
 * The same key as two columns of a caller's statement (`dataRevisionNumber`, `dataRevisionAt`),
 * for the project whose id is the SQL expression `projectIdColumn`: "next" reads it with the item
 * instead of in a round trip of its own. Format the two values with `formatDataRevisionKey`.
 */
export function dataRevisionKeyColumns(projectIdColumn: Prisma.Sql): Prisma.Sql {
  const newest = (column: string) => Prisma.sql`(SELECT r.${Prisma.raw(`"${column}"`)} FROM "Revision" r
      WHERE r."projectId" = ${projectIdColumn} AND r."kind" <> 'review' ORDER BY r."number" DESC LIMIT 1)`;
  return Prisma.sql`${newest('number')} AS "dataRevisionNumber", ${newest('createdAt')} AS "dataRevisionAt"`;
}

/** `dataRevisionKey` from the newest import / update revision's number and creation time (null: none). */
export function formatDataRevisionKey(number: number | bigint | null, createdAt: Date | string | number | null): string {
  return number === null || createdAt === null ? '-1:0' : `${Number(number)}:${new Date(createdAt).getTime()}`;
}

/**
 * The cached matrix for read paths that must be fast (nearest neighbours on every "next"): when a
 * matrix is cached and the project's newest import/update revision is the one it was read at, it
 * is used without counting the samples again (one indexed query instead of an aggregate over all
 * samples). `revisionKey`: that revision's `dataRevisionKey`, when the caller read it already ("next"
 * reads it beside the item). Fits use `featureMatrix`, which always checks the full fingerprint.
 */
export async function featureMatrixForReading(client: Db | DbTx, projectId: string, revisionKey?: string): Promise<FeatureMatrix> {
  const hit = cache().get(projectId);
  if (hit && hit.matrix.fingerprint.endsWith(`:${revisionKey ?? (await dataRevisionKey(client, projectId))}`)) {
    hit.usedAt = Date.now();
    return hit.matrix;
  }
  return featureMatrix(client, projectId);
}

const loadingStore = globalThis as typeof globalThis & { __borderlineFeatureLoads?: Map<string, Promise<FeatureMatrix>> };
const loading = (): Map<string, Promise<FeatureMatrix>> => (loadingStore.__borderlineFeatureLoads ??= new Map());

/** The matrix cached for a project, if any (diagnostics and tests). */
export function cachedFeatureMatrix(projectId: string): FeatureMatrix | null {
  return cache().get(projectId)?.matrix ?? null;
}

/**
 * The project's feature matrix, from the cache when its fingerprint (sample count, newest sample,
 * newest import/update revision) still matches, else read afresh. Concurrent calls for the same
 * fingerprint share one read (a refit arriving while the worker warms up waits for that read).
 */
export async function featureMatrix(client: Db | DbTx, projectId: string): Promise<FeatureMatrix> {
  const fp = await fingerprintOf(client, projectId);
  const hit = cache().get(projectId);
  if (hit && hit.matrix.fingerprint === fp.key) {
    hit.usedAt = Date.now();
    return hit.matrix;
  }
  const key = `${projectId}|${fp.key}`;
  const running = loading().get(key);
  if (running) return running;
  const read = readFeatureMatrix(client, projectId, fp).finally(() => loading().delete(key));
  loading().set(key, read);
  return read;
}

async function readFeatureMatrix(client: Db | DbTx, projectId: string, fp: { key: string; count: number }): Promise<FeatureMatrix> {
  const project = await client.project.findUnique({ where: { id: projectId }, select: { featureCount: true } });
  if (!project) throw new Error(`project ${projectId} not found`);
  const cols = project.featureCount;
  const capacity = fp.count;
  const X = new Float32Array(new SharedArrayBuffer(Math.max(4, capacity * cols * 4)));
  const sampleIds: string[] = [];
  const externalIds: string[] = [];
  const added: number[] = [];
  let cursor: string | undefined;
  for (;;) {
    const page = await client.sample.findMany({
      where: { projectId },
      orderBy: { id: 'asc' },
      take: PAGE,
      ...(cursor ? { cursor: { id: cursor }, skip: 1 } : {}),
      select: { id: true, externalId: true, features: true, addedRevision: true },
    });
    for (const s of page) {
      const row = sampleIds.length;
      if (row >= capacity) break; // samples added while reading: the next fingerprint check reloads
      decodeFeaturesInto(s.features, X, row * cols);
      sampleIds.push(s.id);
      externalIds.push(s.externalId);
      added.push(s.addedRevision);
    }
    if (page.length < PAGE || sampleIds.length >= capacity) break;
    cursor = page[page.length - 1].id;
    await yieldToEventLoop();
  }
  const rows = sampleIds.length;
  const matrix: FeatureMatrix = {
    projectId,
    sampleIds,
    externalIds,
    addedRevision: Int32Array.from(added),
    X: rows === capacity ? X : X.subarray(0, rows * cols),
    rows,
    cols,
    rowOf: new Map(sampleIds.map((id, i) => [id, i])),
    fingerprint: rows === capacity ? fp.key : `partial:${Date.now()}:-2:0`,
  };
  const bytes = rows * cols * 4;
  cache().set(projectId, { matrix, usedAt: Date.now(), bytes });
  let total = 0;
  for (const c of cache().values()) total += c.bytes;
  if (total > FEATURE_CACHE_BYTES) {
    const byAge = [...cache().entries()].sort((a, b) => a[1].usedAt - b[1].usedAt);
    for (const [key, c] of byAge) {
      if (total <= FEATURE_CACHE_BYTES || key === projectId) continue;
      cache().delete(key);
      total -= c.bytes;
    }
  }
  return matrix;
}

/** Labels of every sample at `revision` (samples added later are absent from the map). */
export async function labelsAtRevision(client: Db | DbTx, projectId: string, revision: number): Promise<Map<string, string>> {
  const labels = new Map<string, string>();
  let later = false;
  let cursor: string | undefined;
  for (;;) {
    const page = await client.sample.findMany({
      where: { projectId, addedRevision: { lte: revision } },
      orderBy: { id: 'asc' },
      take: LABEL_PAGE,
      ...(cursor ? { cursor: { id: cursor }, skip: 1 } : {}),
      select: { id: true, currentLabel: true, labelRevision: true },
    });
    for (const s of page) {
      labels.set(s.id, s.currentLabel);
      if (s.labelRevision > revision) later = true;
    }
    if (page.length < LABEL_PAGE) break;
    cursor = page[page.length - 1].id;
    await yieldToEventLoop();
  }
  if (later) {
    const changes = await client.labelChange.findMany({
      where: { projectId, revisionNumber: { gt: revision } },
      orderBy: [{ revisionNumber: 'asc' }],
      select: { sampleId: true, fromLabel: true },
    });
    const seen = new Set<string>();
    for (const c of changes) {
      if (seen.has(c.sampleId)) continue;
      seen.add(c.sampleId);
      if (labels.has(c.sampleId)) labels.set(c.sampleId, c.fromLabel);
    }
  }
  return labels;
}

type LabelCache = { revision: number; fingerprint: string; labels: Map<string, string> };
const labelStore = globalThis as typeof globalThis & { __borderlineLabelCache?: Map<string, LabelCache> };
const labelCache = (): Map<string, LabelCache> => (labelStore.__borderlineLabelCache ??= new Map());

/**
 * `labelsAtRevision` with a per-project memory: going forward from a remembered revision M to N
 * only replays the LabelChange rows of revisions M+1 … N (a refit after a review batch reads a
 * handful of rows instead of every sample). Anything else — an earlier revision, new samples or an
 * import (a new fingerprint) — reads the labels afresh.
 */
export async function cachedLabelsAtRevision(client: Db | DbTx, projectId: string, revision: number, fingerprint: string): Promise<Map<string, string>> {
  const hit = labelCache().get(projectId);
  let labels: Map<string, string>;
  if (hit && hit.fingerprint === fingerprint && hit.revision <= revision) {
    labels = new Map(hit.labels);
    if (revision > hit.revision) {
      const changes = await client.labelChange.findMany({
        where: { projectId, revisionNumber: { gt: hit.revision, lte: revision } },
        orderBy: [{ revisionNumber: 'asc' }],
        select: { sampleId: true, toLabel: true },
      });
      for (const c of changes) if (labels.has(c.sampleId)) labels.set(c.sampleId, c.toLabel);
    }
  } else {
    labels = await labelsAtRevision(client, projectId, revision);
  }
  labelCache().set(projectId, { revision, fingerprint, labels });
  // Callers only read the map; it is replaced, never changed, once cached.
  return labels;
}

export function invalidateLabelCache(projectId?: string): void {
  if (projectId === undefined) labelCache().clear();
  else labelCache().delete(projectId);
}

export interface FitInput {
  readonly sampleIds: string[];
  readonly labels: string[];
  /** rows of the engine's matrix → rows of the cached feature matrix */
  readonly rows: Int32Array;
  readonly X: Float32Array;
  readonly cols: number;
}

const normStore = globalThis as typeof globalThis & { __borderlineL2Cache?: Map<string, { fingerprint: string; X: Float32Array }> };
const normCache = (): Map<string, { fingerprint: string; X: Float32Array }> => (normStore.__borderlineL2Cache ??= new Map());

/**
 * The matrix with every row divided by its Euclidean norm (all-zero rows stay zero), cached like the
 * matrix itself. L2 normalisation is per row and learns nothing from the data, so normalising once
 * here and fitting with scaling "none" gives the fit of scaling "l2" without renormalising (and
 * without the engine's float64 copy of 4·n·d more bytes) on every refit.
 */
export function l2NormalizedRows(m: FeatureMatrix): Float32Array {
  const hit = normCache().get(m.projectId);
  if (hit && hit.fingerprint === m.fingerprint) return hit.X;
  const { rows: n, cols: d, X } = m;
  const out = new Float32Array(new SharedArrayBuffer(Math.max(4, n * d * 4)));
  for (let i = 0; i < n; i++) {
    let ss = 0;
    for (let j = 0; j < d; j++) ss += X[i * d + j] * X[i * d + j];
    const norm = Math.sqrt(ss);
    if (norm > 0) for (let j = 0; j < d; j++) out[i * d + j] = X[i * d + j] / norm;
  }
  normCache().set(m.projectId, { fingerprint: m.fingerprint, X: out });
  return out;
}

/**
 * The engine's input for `revision`: rows in cache order (sample-id order), restricted to samples
 * that existed then; with `l2`, rows already L2-normalised (see l2NormalizedRows).
 */
export async function fitInput(client: Db | DbTx, projectId: string, revision: number, options: { l2?: boolean } = {}): Promise<{ input: FitInput; matrix: FeatureMatrix }> {
  const matrix = await featureMatrixForReading(client, projectId);
  const labels = await cachedLabelsAtRevision(client, projectId, revision, matrix.fingerprint);
  const sampleIds: string[] = [];
  const lab: string[] = [];
  const rows: number[] = [];
  for (let r = 0; r < matrix.rows; r++) {
    const label = labels.get(matrix.sampleIds[r]);
    if (label === undefined) continue;
    sampleIds.push(matrix.sampleIds[r]);
    lab.push(label);
    rows.push(r);
  }
  const source = options.l2 ? l2NormalizedRows(matrix) : matrix.X;
  let X = source;
  if (rows.length !== matrix.rows) {
    const d = matrix.cols;
    X = new Float32Array(new SharedArrayBuffer(Math.max(4, rows.length * d * 4)));
    rows.forEach((r, i) => X.set(source.subarray(r * d, (r + 1) * d), i * d));
  }
  return { input: { sampleIds, labels: lab, rows: Int32Array.from(rows), X, cols: matrix.cols }, matrix };
}

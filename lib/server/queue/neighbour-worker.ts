/**
 * Worker-thread entry for nearest-neighbour searches (started by neighbour-service.ts, twice: one
 * thread for reviewers who wait, one at a lower priority for searches ahead of time; not imported
 * by anything else). workerData: { nice } — the OS priority this thread asks for
 * (lib/server/thread-priority.ts). The feature matrix arrives once per fingerprint as a
 * SharedArrayBuffer-backed Float32Array, so it is shared with the server thread, not copied.
 *
 * Protocol:
 *   ← { type: 'matrix', view: MatrixView }
 *   ← { type: 'query', id, projectId, fingerprint, scaling, rows: number[], k, urgent }
 * Urgent queries (a reviewer waiting for "next") are answered before queued prefetches: queries are
 * buffered; each event-loop turn answers either the waiting urgent queries or a couple of prefetched
 * rows, in one pass over the matrix.
 *   → { type: 'result', id, results: Neighbour[][] }   (one list per requested row)
 *   → { type: 'error', id, message }
 */
import { parentPort, workerData } from 'node:worker_threads';
import { lowerThreadPriority } from '../thread-priority';
import { nearestNeighboursOfRows, type MatrixView, type Neighbour, type Scaling } from './neighbours';

type Query = { type: 'query'; id: number; projectId: string; fingerprint: string; scaling: Scaling; rows: number[]; k: number; urgent?: boolean };
type Incoming = { type: 'matrix'; view: MatrixView } | Query;

const matrices = new Map<string, MatrixView>();
const urgent: Query[] = [];
const later: Query[] = [];
let scheduled = false;
const port = parentPort;
if (!port) throw new Error('lib/server/queue/neighbour-worker.ts must run in a worker thread');

const nice = (workerData as { nice?: unknown } | null)?.nice;
if (typeof nice === 'number' && nice > 0) lowerThreadPriority(nice);

/**
 * Rows searched in one pass over the matrix (see nearestNeighboursOfRows): every waiting urgent
 * query up to URGENT_ROWS, else up to PREFETCH_ROWS prefetched rows. The search is mostly
 * arithmetic, so a pass costs about its row count times one search: prefetch passes stay short so
 * that a reviewer's search never waits long behind them.
 */
const URGENT_ROWS = 16;
const PREFETCH_ROWS = 4;

/** Answers a group of queries on one matrix and scaling with one pass over the matrix. */
function answer(group: Query[]): void {
  const first = group[0];
  const view = matrices.get(first.projectId);
  if (!view || view.fingerprint !== first.fingerprint) {
    for (const q of group) port?.postMessage({ type: 'error', id: q.id, message: 'matrix not loaded' });
    return;
  }
  try {
    const rows = group.flatMap((q) => q.rows);
    const found = nearestNeighboursOfRows(view, first.scaling, rows, first.k);
    let at = 0;
    for (const q of group) {
      const results: Neighbour[][] = found.slice(at, at + q.rows.length);
      at += q.rows.length;
      port?.postMessage({ type: 'result', id: q.id, results });
    }
  } catch (e) {
    for (const q of group) port?.postMessage({ type: 'error', id: q.id, message: e instanceof Error ? e.message : String(e) });
  }
}

const sameSearch = (a: Query, b: Query) => a.projectId === b.projectId && a.fingerprint === b.fingerprint && a.scaling === b.scaling && a.k === b.k;

/** The next query (urgent first) with the other waiting queries of its kind and search, up to the row cap. */
function nextGroup(): Query[] {
  const list = urgent.length > 0 ? urgent : later;
  const cap = urgent.length > 0 ? URGENT_ROWS : PREFETCH_ROWS;
  const head = list[0];
  if (!head) return [];
  const group: Query[] = [];
  let rows = 0;
  for (let i = 0; i < list.length && rows < cap; ) {
    const q = list[i];
    if (sameSearch(q, head) && (rows === 0 || rows + q.rows.length <= cap)) {
      group.push(q);
      rows += q.rows.length;
      list.splice(i, 1);
    } else i++;
  }
  return group;
}

function pump(): void {
  scheduled = false;
  const group = nextGroup();
  if (group.length === 0) return;
  answer(group);
  if (urgent.length > 0 || later.length > 0) {
    scheduled = true;
    setImmediate(pump);
  }
}

port.on('message', (m: Incoming) => {
  if (m.type === 'matrix') {
    matrices.set(m.view.projectId, m.view);
    return;
  }
  (m.urgent ? urgent : later).push(m);
  if (!scheduled) {
    scheduled = true;
    setImmediate(pump);
  }
});

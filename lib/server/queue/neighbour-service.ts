/**
 * Nearest neighbours without blocking the server thread: searches run in two long-lived worker
 * threads that share the feature matrix (SharedArrayBuffer) — one for a reviewer who is waiting
 * (normal priority), one for searches ahead of time (`prefetch`, nice PREFETCH_NICE, so that it
 * takes only CPU time nobody serving a request wants). Results are cached per (matrix fingerprint,
 * scaling, sample) — neighbours depend on features only, not on labels, so a cached answer stays
 * valid across refits. If a worker cannot start, its searches run on the calling thread.
 */
import { join } from 'node:path';
import type { Worker } from 'node:worker_threads';
import { startTsWorker } from '../../margin/worker-client';
import type { FeatureMatrix } from '../fits/data';
import { nearestNeighbours, type Neighbour, type Scaling } from './neighbours';

const K = 5;
const CACHE_LIMIT = 50_000;
/**
 * Priority of the prefetch thread: below the refit engine's nice 10 (fit-worker.ts) too, since a
 * refit's result is awaited by reviewers and a prefetch only might be.
 */
export const PREFETCH_NICE = 15;

type Pending = { resolve: (r: Neighbour[][]) => void; reject: (e: Error) => void };
type Kind = 'urgent' | 'prefetch';

interface Lane {
  worker: Worker | null;
  failed: boolean;
  /** projectId → fingerprint sent to this worker */
  sent: Map<string, string>;
  /** queries sent to this worker and not answered yet (failed with it if it dies) */
  pending: Map<number, Pending>;
}

interface State {
  lanes: Record<Kind, Lane>;
  nextId: number;
  cache: Map<string, Neighbour[]>;
  /** searches under way; `urgent` ones serve a reviewer who is waiting */
  inflight: Map<string, { promise: Promise<Neighbour[]>; urgent: boolean }>;
}

const lane = (): Lane => ({ worker: null, failed: false, sent: new Map(), pending: new Map() });
const holder = globalThis as typeof globalThis & { __borderlineNeighbours?: State };
function state(): State {
  holder.__borderlineNeighbours ??= { lanes: { urgent: lane(), prefetch: lane() }, nextId: 1, cache: new Map(), inflight: new Map() };
  return holder.__borderlineNeighbours;
}

function worker(kind: Kind): Worker | null {
  const st = state();
  const l = st.lanes[kind];
  if (l.worker || l.failed) return l.worker;
  try {
    const w = startTsWorker(join(process.cwd(), 'lib', 'server', 'queue', 'neighbour-worker.ts'), { nice: kind === 'prefetch' ? PREFETCH_NICE : 0 });
    w.unref();
    w.on('message', (m: { type: 'result'; id: number; results: Neighbour[][] } | { type: 'error'; id: number; message: string }) => {
      const p = l.pending.get(m.id);
      if (!p) return;
      l.pending.delete(m.id);
      if (m.type === 'result') p.resolve(m.results);
      else p.reject(new Error(m.message));
    });
    const fail = (e: unknown) => {
      l.worker = null;
      l.failed = true;
      l.sent.clear();
      for (const p of l.pending.values()) p.reject(e instanceof Error ? e : new Error(String(e)));
      l.pending.clear();
    };
    w.on('error', fail);
    w.on('exit', (code) => fail(new Error(`neighbour worker exited (${code})`)));
    l.worker = w;
  } catch {
    l.failed = true;
  }
  return l.worker;
}

function keyOf(m: FeatureMatrix, scaling: Scaling, row: number): string {
  return `${m.projectId}|${m.fingerprint}|${scaling}|${row}`;
}

async function search(m: FeatureMatrix, scaling: Scaling, rows: number[], urgent: boolean): Promise<Neighbour[][]> {
  const kind: Kind = urgent ? 'urgent' : 'prefetch';
  const w = worker(kind);
  if (!w) return rows.map((r) => nearestNeighbours(m, scaling, r, K));
  const st = state();
  const l = st.lanes[kind];
  if (l.sent.get(m.projectId) !== m.fingerprint) {
    w.postMessage({ type: 'matrix', view: { projectId: m.projectId, fingerprint: m.fingerprint, X: m.X, rows: m.rows, cols: m.cols } });
    l.sent.set(m.projectId, m.fingerprint);
  }
  const id = st.nextId++;
  return new Promise<Neighbour[][]>((resolve, reject) => {
    l.pending.set(id, { resolve, reject });
    w.postMessage({ type: 'query', id, projectId: m.projectId, fingerprint: m.fingerprint, scaling, rows, k: K, urgent });
  }).catch(() => rows.map((r) => nearestNeighbours(m, scaling, r, K)));
}

function remember(key: string, value: Neighbour[]): void {
  const st = state();
  if (st.cache.size >= CACHE_LIMIT) st.cache.clear();
  st.cache.set(key, value);
}

/** The five nearest rows of `row` (cached, else searched in the worker). */
export async function neighboursOfRow(m: FeatureMatrix, scaling: Scaling, row: number): Promise<Neighbour[]> {
  const st = state();
  const key = keyOf(m, scaling, row);
  const hit = st.cache.get(key);
  if (hit) return hit;
  // A prefetch of the same row may sit behind other prefetches in the slow lane: search again, urgently.
  const running = st.inflight.get(key);
  if (running?.urgent) return running.promise;
  const p = search(m, scaling, [row], true).then((r) => {
    remember(key, r[0]);
    st.inflight.delete(key);
    return r[0];
  });
  st.inflight.set(key, { promise: p, urgent: true });
  return p;
}

/** Searches ahead for rows not cached yet (fire and forget; errors are ignored). */
export function prefetchNeighbours(m: FeatureMatrix, scaling: Scaling, rows: number[]): void {
  const st = state();
  const todo = rows.filter((r) => !st.cache.has(keyOf(m, scaling, r)) && !st.inflight.has(keyOf(m, scaling, r)));
  if (todo.length === 0) return;
  // One query per row: the prefetch worker searches a few of them per pass (neighbour-worker.ts).
  for (const r of todo) {
    const key = keyOf(m, scaling, r);
    const one = search(m, scaling, [r], false).then((res) => {
      remember(key, res[0]);
      if (!st.inflight.get(key)?.urgent) st.inflight.delete(key);
      return res[0];
    });
    one.catch(() => {
      if (!st.inflight.get(key)?.urgent) st.inflight.delete(key);
    });
    st.inflight.set(key, { promise: one, urgent: false });
  }
}

/**
 * Nearest neighbours without blocking the server thread: searches run in one long-lived worker
 * thread that shares the feature matrix (SharedArrayBuffer), results are cached per (matrix
 * fingerprint, scaling, sample) — neighbours depend on features only, not on labels, so a cached
 * answer stays valid across refits — and the items a reviewer is likely to get next are searched
 * ahead of time (`prefetch`). If the worker cannot start, searches run on the calling thread.
 */
import { join } from 'node:path';
import type { Worker } from 'node:worker_threads';
import { startTsWorker } from '../../margin/worker-client';
import type { FeatureMatrix } from '../fits/data';
import { nearestNeighbours, type Neighbour, type Scaling } from './neighbours';

const K = 5;
const CACHE_LIMIT = 50_000;

type Pending = { resolve: (r: Neighbour[][]) => void; reject: (e: Error) => void };

interface State {
  worker: Worker | null;
  failed: boolean;
  nextId: number;
  pending: Map<number, Pending>;
  /** projectId → fingerprint sent to the worker */
  sent: Map<string, string>;
  cache: Map<string, Neighbour[]>;
  /** searches under way; `urgent` ones serve a reviewer who is waiting */
  inflight: Map<string, { promise: Promise<Neighbour[]>; urgent: boolean }>;
}

const holder = globalThis as typeof globalThis & { __borderlineNeighbours?: State };
function state(): State {
  holder.__borderlineNeighbours ??= { worker: null, failed: false, nextId: 1, pending: new Map(), sent: new Map(), cache: new Map(), inflight: new Map() };
  return holder.__borderlineNeighbours;
}

function worker(): Worker | null {
  const st = state();
  if (st.worker || st.failed) return st.worker;
  try {
    const w = startTsWorker(join(process.cwd(), 'lib', 'server', 'queue', 'neighbour-worker.ts'), {});
    w.unref();
    w.on('message', (m: { type: 'result'; id: number; results: Neighbour[][] } | { type: 'error'; id: number; message: string }) => {
      const p = st.pending.get(m.id);
      if (!p) return;
      st.pending.delete(m.id);
      if (m.type === 'result') p.resolve(m.results);
      else p.reject(new Error(m.message));
    });
    const fail = (e: unknown) => {
      st.worker = null;
      st.failed = true;
      st.sent.clear();
      for (const p of st.pending.values()) p.reject(e instanceof Error ? e : new Error(String(e)));
      st.pending.clear();
    };
    w.on('error', fail);
    w.on('exit', (code) => fail(new Error(`neighbour worker exited (${code})`)));
    st.worker = w;
  } catch {
    st.failed = true;
  }
  return st.worker;
}

function keyOf(m: FeatureMatrix, scaling: Scaling, row: number): string {
  return `${m.projectId}|${m.fingerprint}|${scaling}|${row}`;
}

async function search(m: FeatureMatrix, scaling: Scaling, rows: number[], urgent: boolean): Promise<Neighbour[][]> {
  const w = worker();
  if (!w) return rows.map((r) => nearestNeighbours(m, scaling, r, K));
  const st = state();
  if (st.sent.get(m.projectId) !== m.fingerprint) {
    w.postMessage({ type: 'matrix', view: { projectId: m.projectId, fingerprint: m.fingerprint, X: m.X, rows: m.rows, cols: m.cols } });
    st.sent.set(m.projectId, m.fingerprint);
  }
  const id = st.nextId++;
  return new Promise<Neighbour[][]>((resolve, reject) => {
    st.pending.set(id, { resolve, reject });
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
  // A prefetch of the same row may sit behind other prefetches in the worker: search again, urgently.
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
  // One query per row: the worker searches a couple of them per pass, so a reviewer's urgent search
  // waits for at most that pass (neighbour-worker.ts).
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

/**
 * Worker-thread entry for nearest-neighbour searches (started by neighbour-service.ts; not imported
 * by anything else). The feature matrix arrives once per fingerprint as a SharedArrayBuffer-backed
 * Float32Array, so it is shared with the server thread, not copied.
 *
 * Protocol:
 *   ← { type: 'matrix', view: MatrixView }
 *   ← { type: 'query', id, projectId, fingerprint, scaling, rows: number[], k, urgent }
 * Urgent queries (a reviewer waiting for "next") are answered before queued prefetches: queries are
 * buffered and taken one per event-loop turn, urgent first.
 *   → { type: 'result', id, results: Neighbour[][] }   (one list per requested row)
 *   → { type: 'error', id, message }
 */
import { parentPort } from 'node:worker_threads';
import { nearestNeighbours, type MatrixView, type Neighbour, type Scaling } from './neighbours';

type Query = { type: 'query'; id: number; projectId: string; fingerprint: string; scaling: Scaling; rows: number[]; k: number; urgent?: boolean };
type Incoming = { type: 'matrix'; view: MatrixView } | Query;

const matrices = new Map<string, MatrixView>();
const urgent: Query[] = [];
const later: Query[] = [];
let scheduled = false;
const port = parentPort;
if (!port) throw new Error('lib/server/queue/neighbour-worker.ts must run in a worker thread');

function answer(m: Query): void {
  const view = matrices.get(m.projectId);
  if (!view || view.fingerprint !== m.fingerprint) {
    port?.postMessage({ type: 'error', id: m.id, message: 'matrix not loaded' });
    return;
  }
  try {
    const results: Neighbour[][] = m.rows.map((row) => nearestNeighbours(view, m.scaling, row, m.k));
    port?.postMessage({ type: 'result', id: m.id, results });
  } catch (e) {
    port?.postMessage({ type: 'error', id: m.id, message: e instanceof Error ? e.message : String(e) });
  }
}

function pump(): void {
  scheduled = false;
  const next = urgent.shift() ?? later.shift();
  if (!next) return;
  answer(next);
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

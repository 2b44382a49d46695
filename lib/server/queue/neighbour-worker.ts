/**
 * Worker-thread entry for nearest-neighbour searches (started by neighbour-service.ts; not imported
 * by anything else). The feature matrix arrives once per fingerprint as a SharedArrayBuffer-backed
 * Float32Array, so it is shared with the server thread, not copied.
 *
 * Protocol:
 *   ← { type: 'matrix', view: MatrixView }
 *   ← { type: 'query', id, projectId, fingerprint, scaling, rows: number[], k }
 *   → { type: 'result', id, results: Neighbour[][] }   (one list per requested row)
 *   → { type: 'error', id, message }
 */
import { parentPort } from 'node:worker_threads';
import { nearestNeighbours, type MatrixView, type Neighbour, type Scaling } from './neighbours';

type Incoming =
  | { type: 'matrix'; view: MatrixView }
  | { type: 'query'; id: number; projectId: string; fingerprint: string; scaling: Scaling; rows: number[]; k: number };

const matrices = new Map<string, MatrixView>();
const port = parentPort;
if (!port) throw new Error('lib/server/queue/neighbour-worker.ts must run in a worker thread');

port.on('message', (m: Incoming) => {
  if (m.type === 'matrix') {
    matrices.set(m.view.projectId, m.view);
    return;
  }
  const view = matrices.get(m.projectId);
  if (!view || view.fingerprint !== m.fingerprint) {
    port.postMessage({ type: 'error', id: m.id, message: 'matrix not loaded' });
    return;
  }
  try {
    const results: Neighbour[][] = m.rows.map((row) => nearestNeighbours(view, m.scaling, row, m.k));
    port.postMessage({ type: 'result', id: m.id, results });
  } catch (e) {
    port.postMessage({ type: 'error', id: m.id, message: e instanceof Error ? e.message : String(e) });
  }
});

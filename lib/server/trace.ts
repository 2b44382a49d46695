/**
 * Stage timings of the queue's request path, for the queue benchmark (bench/queue.ts prints them
 * when its server stops). Off unless BORDERLINE_QUEUE_TRACE=1, and then only an array push per
 * stage: nothing here changes what a request does.
 *
 * `traceRequest` also keeps the stages of one request in order (start and end, in ms from the
 * request's start), so the benchmark can print where its slowest requests spent their time.
 */
import { AsyncLocalStorage } from 'node:async_hooks';

const on = process.env.BORDERLINE_QUEUE_TRACE === '1';
const stats = new Map<string, number[]>();

/** One stage of a request: label, start and end in ms from the request's start. */
export type Stage = readonly [label: string, start: number, end: number];
const current = new AsyncLocalStorage<{ t0: number; stages: Stage[] }>();

export function record(label: string, ms: number): void {
  if (!on) return;
  let list = stats.get(label);
  if (!list) stats.set(label, (list = []));
  list.push(ms);
  const request = current.getStore();
  if (request) {
    const end = performance.now() - request.t0;
    request.stages.push([label, end - ms, end]);
  }
}

export async function traced<T>(label: string, fn: () => Promise<T>): Promise<T> {
  if (!on) return fn();
  const start = performance.now();
  try {
    return await fn();
  } finally {
    record(label, performance.now() - start);
  }
}

/** Runs `fn` collecting the stages recorded inside it (none when tracing is off). */
export async function traceRequest<T>(fn: () => Promise<T>): Promise<{ result: T; stages: Stage[] }> {
  if (!on) return { result: await fn(), stages: [] };
  const store = { t0: performance.now(), stages: [] as Stage[] };
  const result = await current.run(store, fn);
  return { result, stages: store.stages.sort((a, b) => a[1] - b[1]) };
}

/** One line per stage: count, p50 / p95 / p99 / max and the sum in milliseconds. */
export function traceReport(): string {
  const q = (s: number[], p: number) => s[Math.min(s.length - 1, Math.max(0, Math.ceil(p * s.length) - 1))] ?? NaN;
  const f = (v: number) => v.toFixed(1).padStart(8);
  return [...stats]
    .sort(([a], [b]) => (a < b ? -1 : 1))
    .map(([label, values]) => {
      const s = [...values].sort((a, b) => a - b);
      const sum = values.reduce((a, b) => a + b, 0);
      return `${label.padEnd(22)} n=${String(s.length).padStart(6)} p50=${f(q(s, 0.5))} p95=${f(q(s, 0.95))} p99=${f(q(s, 0.99))} max=${f(s[s.length - 1])} sum=${sum.toFixed(0)}`;
    })
    .join('\n');
}

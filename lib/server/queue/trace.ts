/**
 * Stage timings of the queue's request path, for the queue benchmark (bench/queue.ts prints them
 * when its server stops). Off unless BORDERLINE_QUEUE_TRACE=1, and then only an array push per
 * stage: nothing here changes what a request does.
 */
const on = process.env.BORDERLINE_QUEUE_TRACE === '1';
const stats = new Map<string, number[]>();

export function record(label: string, ms: number): void {
  if (!on) return;
  let list = stats.get(label);
  if (!list) stats.set(label, (list = []));
  list.push(ms);
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

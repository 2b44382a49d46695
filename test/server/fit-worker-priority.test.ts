// The refit engine thread runs at a lower OS priority than the threads serving requests
// (lib/server/fits/fit-worker.ts, ENGINE_NICE). On Linux each thread is a task with its own nice
// value, readable in /proc/self/task/<tid>/stat (field 19, proc(5) — common practice on Linux).
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { getPriority } from 'node:os';
import { describe, expect, it } from 'vitest';
import { DEFAULT_PROJECT_SETTINGS } from '@/lib/domain-queue';
import { persistentWorkerEngine } from '@/lib/server/fits/engine';
import { engineSettings } from '@/lib/server/fits/run-fit';

function taskNiceValues(): number[] {
  return readdirSync('/proc/self/task').map((tid) => {
    const stat = readFileSync(`/proc/self/task/${tid}/stat`, 'utf8');
    // Fields after the command name (which is in parentheses and may contain spaces).
    const rest = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    return Number(rest[16]); // field 19 overall: nice
  });
}

describe.skipIf(!existsSync('/proc/self/task'))('the refit engine thread', () => {
  it('lowers its own priority to nice 10 and leaves the calling thread alone', async () => {
    const before = taskNiceValues().filter((n) => n === 10).length;
    const engine = persistentWorkerEngine();
    const data = { ids: ['a', 'b', 'c', 'd'], labels: ['x', 'x', 'y', 'y'], X: { data: Float64Array.from([0, 0, 0, 1, 3, 0, 3, 1]), rows: 4, cols: 2 } };
    const fit = await engine.fit(data, { ...engineSettings(DEFAULT_PROJECT_SETTINGS, 4, 2, null), pivotCap: 0 }, () => {});
    expect(fit.classes).toEqual(['x', 'y']);
    expect(taskNiceValues().filter((n) => n === 10).length).toBe(before + 1);
    expect(getPriority(0)).toBe(0);
  });
});

// The refit engine thread and the neighbour prefetch thread run at a lower OS priority than the
// threads serving requests (lib/server/fits/fit-worker.ts ENGINE_NICE, lib/server/queue/
// neighbour-service.ts PREFETCH_NICE); the thread answering a waiting reviewer does not. On Linux each thread is a task with its own nice
// value, readable in /proc/self/task/<tid>/stat (field 19, proc(5) — common practice on Linux).
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { getPriority } from 'node:os';
import { describe, expect, it } from 'vitest';
import { DEFAULT_PROJECT_SETTINGS } from '@/lib/domain-queue';
import { persistentWorkerEngine } from '@/lib/server/fits/engine';
import { engineSettings } from '@/lib/server/fits/run-fit';
import type { FeatureMatrix } from '@/lib/server/fits/data';
import { neighboursOfRow, PREFETCH_NICE, prefetchNeighbours } from '@/lib/server/queue/neighbour-service';
import { workerStandingsWriter } from '@/lib/server/fits/standings-writer';
import { createTestDatabase, TEST_PROVIDER } from './db-harness';

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

describe.skipIf(!existsSync('/proc/self/task'))('the neighbour search threads', () => {
  it('search ahead at nice 15 and answer a waiting reviewer at the normal priority', async () => {
    expect(PREFETCH_NICE).toBe(15);
    const before = taskNiceValues();
    const points = [0, 0, 1, 0, 0, 2, 5, 5, 6, 5];
    const X = new Float32Array(new SharedArrayBuffer(points.length * 4));
    X.set(points);
    const ids = ['a', 'b', 'c', 'd', 'e'];
    const m: FeatureMatrix = {
      projectId: 'priority-test',
      sampleIds: ids,
      externalIds: ids,
      addedRevision: new Int32Array(5),
      X,
      rows: 5,
      cols: 2,
      rowOf: new Map(ids.map((id, i) => [id, i])),
      fingerprint: 'priority-test:1',
    };
    prefetchNeighbours(m, 'none', [3]);
    // Row 4 (6,5): nearest (5,5) at 1, then (0,2) at √45, (1,0) at √50, (0,0) at √61.
    const found = await neighboursOfRow(m, 'none', 4);
    expect(found.map((x) => x.row)).toEqual([3, 2, 1, 0]);
    // Row 3 was searched by the prefetch thread; asking for it now waits for that answer or searches again.
    expect((await neighboursOfRow(m, 'none', 3))[0]).toEqual({ row: 4, distance: 1 });
    // The prefetch thread lowers its priority as it starts, which may be after the answers above.
    const at15 = () => taskNiceValues().filter((n) => n === 15).length;
    const before15 = before.filter((n) => n === 15).length;
    for (let i = 0; i < 500 && at15() <= before15; i++) await new Promise((r) => setTimeout(r, 10));
    const after = taskNiceValues();
    expect(after.filter((n) => n === 15).length).toBe(before15 + 1);
    expect(after.length).toBeGreaterThanOrEqual(before.length + 2);
    expect(getPriority(0)).toBe(0);
  });
});

describe.skipIf(!existsSync('/proc/self/task'))('the standings writer thread', () => {
  it(`runs at nice 10 on PostgreSQL and at the normal priority on SQLite (here: ${TEST_PROVIDER})`, async () => {
    const t = await createTestDatabase();
    try {
      await t.migrate();
      const before = taskNiceValues();
      const writer = workerStandingsWriter(t.config);
      expect(await writer.prune(['no-such-fit'])).toBe(0); // starts the thread, deletes nothing
      const after = taskNiceValues();
      const at10 = (v: number[]) => v.filter((n) => n === 10).length;
      expect(at10(after) - at10(before)).toBe(TEST_PROVIDER === 'postgresql' ? 1 : 0);
    } finally {
      await t.drop();
    }
  });
});

// The writer gate (lib/server/sqlite-gate.ts), driven from one thread with the two counters set
// by hand: a background write waits for the server thread's pending writes and a quiet spell, is
// counted busy while it runs (several at once add up), and the server thread's wait ends when the
// count is back to 0. Order of events only; no timing is asserted.
import { describe, expect, it } from 'vitest';
import { asPendingWrite, backgroundIdle, backgroundTurn, GATE_BACKGROUND_BUSY, GATE_PENDING, newWriterGate } from '@/lib/server/sqlite-gate';

const tick = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('the writer gate', () => {
  it('holds a background write back while the server thread has a write pending', async () => {
    const gate = newWriterGate();
    const events: string[] = [];
    let finishServerWrite: () => void = () => {};
    const server = asPendingWrite(gate, async () => {
      events.push('server write starts');
      await new Promise<void>((r) => (finishServerWrite = r));
      events.push('server write ends');
    });
    expect(Atomics.load(gate, GATE_PENDING)).toBe(1);
    const background = backgroundTurn(gate, () => {
      events.push(`background write (busy ${Atomics.load(gate, GATE_BACKGROUND_BUSY)}, pending ${Atomics.load(gate, GATE_PENDING)})`);
      return 7;
    });
    await tick(40);
    expect(events).toEqual(['server write starts']);
    finishServerWrite();
    await server;
    expect(await background).toBe(7);
    expect(events).toEqual(['server write starts', 'server write ends', 'background write (busy 1, pending 0)']);
    expect(Atomics.load(gate, GATE_BACKGROUND_BUSY)).toBe(0);
  });

  it('counts two background writers at once, and the server thread waits until both are done', async () => {
    const gate = newWriterGate();
    const release: (() => void)[] = [];
    const inside = (name: string) => backgroundTurn(gate, () => new Promise<string>((r) => release.push(() => r(name))), { quietMs: 0 });
    const a = inside('a');
    const b = inside('b');
    while (release.length < 2) await tick(2);
    expect(Atomics.load(gate, GATE_BACKGROUND_BUSY)).toBe(2);
    let idle = false;
    const waiting = backgroundIdle(gate).then(() => (idle = true));
    release[0]();
    expect(await a).toBe('a');
    await tick(10);
    expect(idle).toBe(false);
    release[1]();
    expect(await b).toBe('b');
    await waiting;
    expect(idle).toBe(true);
  });

  it('goes ahead after its patience runs out, so background work is never starved', async () => {
    const gate = newWriterGate();
    Atomics.add(gate, GATE_PENDING, 1); // a server write that never ends
    const result = await backgroundTurn(gate, () => Atomics.load(gate, GATE_BACKGROUND_BUSY), { patienceMs: 20 });
    expect(result).toBe(1);
    expect(Atomics.load(gate, GATE_BACKGROUND_BUSY)).toBe(0);
  });

  it('releases the busy count when the write throws', async () => {
    const gate = newWriterGate();
    await expect(
      backgroundTurn(gate, () => {
        throw new Error('constraint failed');
      }),
    ).rejects.toThrow('constraint failed');
    expect(Atomics.load(gate, GATE_BACKGROUND_BUSY)).toBe(0);
  });
});

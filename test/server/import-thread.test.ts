// Large in-process imports run in the import thread (lib/server/import/thread.ts) with their own
// database connection: through the Data screen's route a file of at least 1 MiB streams the same
// progress lines and ends with the same outcome as on the request's thread; a refused file is
// refused with the same problems; a body that fails mid-way leaves nothing behind; and on SQLite
// the server thread's own writes during the import neither fail nor get lost (writer gate).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { POST as importRoute } from '@/app/api/projects/[projectId]/imports/route';
import { tooLarge } from '@/lib/server/authz/errors';
import { mintTeamScope } from '@/lib/server/authz/scope';
import { env, resetEnvCache } from '@/lib/server/env';
import { importSamples, type ImportOutcome } from '@/lib/server/import';
import { JOB_IMPORT_MIN_BYTES, type ImportStreamLine } from '@/lib/server/import/http';
import { importInThread, importThreadStarted } from '@/lib/server/import/thread';
import { writeTx, writerGate } from '@/lib/server/queue/tx';
import { GATE_BACKGROUND_BUSY } from '@/lib/server/sqlite-gate';
import { TEST_PROVIDER } from './db-harness';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase } from './auth-harness';

let app: AppDatabase;
beforeAll(async () => {
  // The in-process job mode, where large imports use the import thread (on PostgreSQL the default
  // would stage them for `npm run worker` processes instead, see import-job.test.ts).
  process.env.BORDERLINE_JOBS = 'in-process';
  app = await openAppDatabase();
});
afterAll(async () => {
  await app.close();
  delete process.env.BORDERLINE_JOBS;
  resetEnvCache();
});

/** A CSV of `rows` two-feature samples, larger than JOB_IMPORT_MIN_BYTES from about 35,000 rows. */
function csv(rows: number, bad?: { row: number; value: string }): string {
  const lines = ['id,label,x,y'];
  for (let i = 0; i < rows; i++) {
    const x = bad && bad.row === i + 1 ? bad.value : ((i * 7919) % 10007) / 1000;
    lines.push(`s${String(i).padStart(6, '0')},${i % 3 ? 'left' : 'right'},${x},${-i / 1000}`);
  }
  return `${lines.join('\n')}\n`;
}

async function* chunked(text: string, size = 64 * 1024, failAfter?: number): AsyncGenerator<Uint8Array> {
  const bytes = new TextEncoder().encode(text);
  for (let at = 0; at < bytes.byteLength; at += size) {
    if (failAfter !== undefined && at >= failAfter) throw tooLarge('The file is larger than 1 MB.');
    yield bytes.slice(at, at + size);
  }
}

function withoutIds(o: ImportOutcome): Record<string, unknown> {
  const { batchId: _b, ...rest } = o as ImportOutcome & { batchId: unknown; fitId?: unknown };
  return { ...rest, ...('fitId' in rest ? { fitId: rest.fitId === null ? null : 'set' } : {}) };
}

describe('the import thread', () => {
  it('imports a file of more than 1 MiB sent to the Data screen route, with progress lines, and queues its refit', async () => {
    const g = await buildFixture(app.client, new Date(), '-thread');
    const cookie = await sessionFor(g.leadA);
    const body = csv(40_000);
    expect(body.length).toBeGreaterThan(JOB_IMPORT_MIN_BYTES);
    const req = new Request('http://127.0.0.1/api?fileName=big.csv', { method: 'POST', body });
    const res = await call(contextFor(cookie), () => importRoute(req, { params: Promise.resolve({ projectId: g.projectA }) }));
    expect(res.status).toBe(200);
    const events = (await res.text()).trim().split('\n').map((l) => JSON.parse(l) as ImportStreamLine);
    expect(events.some((e) => e.type === 'progress' && e.phase === 'reading')).toBe(true);
    expect(events.at(-1)).toMatchObject({ type: 'result', outcome: { ok: true, added: 40_000, fileName: 'big.csv', revisionNumber: 0 } });
    expect(importThreadStarted()).toBe(true);
    expect(await app.client.sample.count({ where: { projectId: g.projectA } })).toBe(40_000);
    const s = await app.client.sample.findFirstOrThrow({ where: { projectId: g.projectA, externalId: 's000003' } });
    expect(s.currentLabel).toBe('right');
    const fits = await app.client.fit.findMany({ where: { projectId: g.projectA }, select: { revisionNumber: true } });
    expect(fits.map((f) => f.revisionNumber)).toEqual([0]);
  });

  it('gives the same outcome as the request thread, for an accepted file and for a refused one', async () => {
    const g = await buildFixture(app.client, new Date(), '-same');
    const scope = mintTeamScope(g.teamA);
    const input = { fileName: 'same.csv', mode: 'insert' as const, userId: g.leadA };
    const good = csv(36_000);
    const here = await importSamples(scope, g.projectA, { ...input, source: chunked(good) }, { client: app.client });
    const there = await importInThread(env().database, scope, await newProject(g.teamA), input, chunked(good));
    expect(withoutIds(there)).toEqual(withoutIds(here));

    const refused = csv(36_000, { row: 35_500, value: 'seven' });
    const p1 = await newProject(g.teamA);
    const p2 = await newProject(g.teamA);
    const a = await importSamples(scope, p1, { ...input, source: chunked(refused) }, { client: app.client });
    const b = await importInThread(env().database, scope, p2, input, chunked(refused));
    expect(b.ok).toBe(false);
    expect(withoutIds(b)).toEqual(withoutIds(a));
    if (!b.ok) expect(b.problems[0].row).toBe(35_501); // data row 35,500 is line 35,501 of the file
    expect(await app.client.sample.count({ where: { projectId: p2 } })).toBe(0);
  });

  it('rejects with the reading error when the body fails mid-way, and keeps nothing', async () => {
    const g = await buildFixture(app.client, new Date(), '-fail');
    const p = await newProject(g.teamA);
    const input = { fileName: 'cut.csv', mode: 'insert' as const, userId: g.leadA };
    const run = importInThread(env().database, mintTeamScope(g.teamA), p, input, chunked(csv(40_000), 64 * 1024, 512 * 1024));
    await expect(run).rejects.toMatchObject({ name: 'ActionError', status: 413, message: 'The file is larger than 1 MB.' });
    expect(await app.client.sample.count({ where: { projectId: p } })).toBe(0);
    expect(await app.client.revision.count({ where: { projectId: p } })).toBe(0);
  });

  it('lets the server thread write during the import: no write fails or is lost', async () => {
    const g = await buildFixture(app.client, new Date(), '-gate');
    const p = await newProject(g.teamA);
    const importing = importInThread(env().database, mintTeamScope(g.teamA), p, { fileName: 'gate.csv', mode: 'insert', userId: g.leadA }, chunked(csv(60_000)));
    const writes: Promise<unknown>[] = [];
    // On SQLite the thread flags its writes in the server thread's gate while it holds the lock.
    let sawBackgroundWrite = false;
    const watch = setInterval(() => {
      if (Atomics.load(writerGate(), GATE_BACKGROUND_BUSY) > 0) sawBackgroundWrite = true;
    }, 2);
    for (let i = 0; i < 40; i++) {
      writes.push(
        writeTx(app.client, [{ table: 'Project', id: g.projectA }], (tx) =>
          tx.project.update({ where: { id: g.projectA }, data: { description: `write ${i}` } }),
        ),
      );
      await new Promise((r) => setTimeout(r, 10));
    }
    const [outcome] = await Promise.all([importing, ...writes]);
    clearInterval(watch);
    expect(sawBackgroundWrite).toBe(TEST_PROVIDER === 'sqlite');
    expect(outcome).toMatchObject({ ok: true, added: 60_000 });
    expect(await app.client.sample.count({ where: { projectId: p } })).toBe(60_000);
    const project = await app.client.project.findUniqueOrThrow({ where: { id: g.projectA } });
    expect(project.description).toBe('write 39');
  });
});

async function newProject(teamId: string): Promise<string> {
  const p = await app.client.project.create({ data: { teamId, name: `p-${Math.random().toString(36).slice(2)}`, featureCount: 2, settings: '{}' } });
  await app.client.projectClass.createMany({
    data: [
      { projectId: p.id, name: 'left', position: 0 },
      { projectId: p.id, name: 'right', position: 1 },
    ],
  });
  return p.id;
}

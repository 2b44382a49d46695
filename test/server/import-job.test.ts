// Imports through the PostgreSQL job system (lib/server/import/staged.ts, job.ts, http.ts): a
// large file sent to the Data screen's upload route or the pipeline API is staged into chunks,
// applied by a worker and answered exactly as the in-process import answers the same file (the
// reference: the same bytes imported in-process into a second project of the same team). A
// refusal comes back with the same problems and writes nothing; a job delivered twice changes
// nothing. Crash cases are in import-job-crash.test.ts.
import type PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { POST as importRoute } from '@/app/api/projects/[projectId]/imports/route';
import { POST as samplesRoute } from '@/app/api/v1/projects/[projectId]/samples/route';
import { mintTeamScope } from '@/lib/server/authz/scope';
import { importSamples, type ImportOutcome } from '@/lib/server/import';
import { JOB_IMPORT_MIN_BYTES, type ImportStreamLine } from '@/lib/server/import/http';
import { importThreadStarted, stageInThread } from '@/lib/server/import/thread';
import { parseDatabaseUrl } from '@/lib/server/env';
import { startImportJobWorker, type ImportJobWorker } from '@/lib/server/import/job';
import { appJobSystem } from '@/lib/server/jobs/app';
import { newTokenSecret } from '@/lib/server/tokens';
import { JOB_QUEUES, JOB_SCHEMA, sendImport, startJobSystem } from '@/lib/server/jobs/boss';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase, type Fixture } from './auth-harness';
import { TEST_PROVIDER } from './db-harness';
import { chunked, projectState, type ImportWorld } from './import-helpers';

/**
 * A CSV of the fixture's shape (2 features, classes left/right) with a text column, so that a
 * few thousand rows are over the job system's threshold (JOB_IMPORT_MIN_BYTES).
 */
function bigCsv(rows: number, options: { badRow?: number; relabelEvery?: number } = {}): string {
  const lines = ['id,label,text,x,y'];
  const filler = 'buoy log entry with a long free-text note about tide, wind and the state of the mooring chain'.repeat(2);
  for (let i = 0; i < rows; i++) {
    const x = i === options.badRow ? 'wide' : String(((i * 37) % 2000) / 1000 - 1);
    const flip = options.relabelEvery !== undefined && i % options.relabelEvery === 0;
    const label = (i % 3 === 0) !== flip ? 'right' : 'left';
    lines.push(`s${String(i).padStart(6, '0')},${label},"${filler} #${i}",${x},${((i * 11) % 500) / 250}`);
  }
  return `${lines.join('\n')}\n`;
}

const ROWS = 6_000;

describe.skipIf(TEST_PROVIDER !== 'postgresql')('imports on the job system', () => {
  let app: AppDatabase;
  let f: Fixture;
  let cookie: string;
  let workerBoss: PgBoss;
  let worker: ImportJobWorker;
  let world: ImportWorld;

  beforeAll(async () => {
    app = await openAppDatabase();
    f = await buildFixture(app.client);
    cookie = await sessionFor(f.leadA);
    workerBoss = await startJobSystem({ connectionString: app.t.url, role: 'worker' });
    worker = await startImportJobWorker({
      db: app.client,
      boss: workerBoss,
      workerId: 'test-worker',
      lease: { heartbeatMs: 200, staleMs: 5000 },
      sweepMs: 500,
      progressMs: 50,
      log: process.env.DEBUG_IMPORT_JOB ? (m, x) => console.log(m, JSON.stringify(x)) : undefined,
    });
    world = { t: app.t, db: app.client, teamId: await teamOf(f.projectA), userId: f.leadA, scope: mintTeamScope(await teamOf(f.projectA)), close: async () => {} };
  });
  afterAll(async () => {
    await worker.stop();
    await workerBoss.stop({ graceful: false, wait: true });
    await (await appJobSystem()).stop({ graceful: false, wait: true });
    await app.close();
  });

  async function teamOf(projectId: string): Promise<string> {
    return (await app.client.project.findUniqueOrThrow({ where: { id: projectId }, select: { teamId: true } })).teamId;
  }

  /** A second project of team A, shaped like the fixture's, for the in-process reference import. */
  async function twinProject(name: string): Promise<string> {
    const p = await app.client.project.create({ data: { teamId: world.teamId, name, featureCount: 2, settings: '{}' } });
    await app.client.projectClass.createMany({ data: ['left', 'right'].map((n, position) => ({ projectId: p.id, name: n, position })) });
    return p.id;
  }

  function inProcess(projectId: string, body: string, mode: 'insert' | 'update', fileName: string): Promise<ImportOutcome> {
    return importSamples(world.scope, projectId, { source: chunked(body, 65_536), fileName, mode, userId: f.leadA }, { client: app.client });
  }

  type Handler = (req: Request, ctx: { params: Promise<Record<string, string>> }) => Promise<Response>;
  function post(handler: Handler, projectId: string, query: string, body: string, auth: { cookie?: string; token?: string }): Promise<Response> {
    const headers: Record<string, string> = auth.token ? { authorization: `Bearer ${auth.token}` } : {};
    const req = new Request(`http://127.0.0.1/api${query}`, { method: 'POST', headers, body });
    return call(contextFor(auth.cookie ?? null), () => handler(req, { params: Promise.resolve({ projectId }) }));
  }

  /** Outcome without the ids that differ between two imports (batch and fit ids). */
  function comparable(o: ImportOutcome) {
    const { batchId: _batch, ...rest } = o;
    return 'fitId' in rest ? { ...rest, fitId: rest.fitId === null ? null : 'fit' } : rest;
  }

  /** Project data without row ids and timestamps (they differ between two projects by construction). */
  async function content(projectId: string) {
    const s = await projectState(world, projectId);
    return {
      project: s.project,
      classes: s.classes,
      samples: s.samples.map(({ id: _id, updatedAt: _u, ...rest }) => rest),
      revisions: s.revisions.map(({ id: _id, ...rest }) => rest),
      changes: s.changes.length,
      fits: s.fits.map((x) => [x.status, x.revisionNumber]),
    };
  }

  async function tokenFor(projectId: string): Promise<string> {
    const { secret, prefix, hash } = newTokenSecret();
    await app.client.pipelineToken.create({ data: { projectId, name: 'ci', tokenHash: hash, prefix, createdById: f.leadA } });
    return secret;
  }

  async function history(projectId: string) {
    const rows = await app.client.importBatch.findMany({
      where: { projectId },
      orderBy: { createdAt: 'asc' },
      select: { status: true, fileName: true, format: true, mode: true, rowCount: true, revisionNumber: true, error: true, createdById: true },
    });
    return rows;
  }

  it('Data screen upload: staged, applied by the worker, answered and stored as the in-process import', async () => {
    const body = bigCsv(ROWS);
    expect(body.length).toBeGreaterThan(JOB_IMPORT_MIN_BYTES);
    const twin = await twinProject('Buoys (in-process)');
    const reference = await inProcess(twin, body, 'insert', 'buoys.csv');
    expect(reference.ok).toBe(true);

    const target = await twinProject('Buoys (job system)');
    expect(importThreadStarted()).toBe(false);
    const res = await post(importRoute as Handler, target, '?fileName=buoys.csv&mode=insert', body, { cookie });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('application/x-ndjson; charset=utf-8');
    const events = (await res.text()).trim().split('\n').map((l) => JSON.parse(l) as ImportStreamLine);
    // The upload was staged by the import thread, not on the thread answering requests.
    expect(importThreadStarted()).toBe(true);
    const last = events.at(-1);
    if (last?.type !== 'result') throw new Error(JSON.stringify(last));
    expect(comparable(last.outcome)).toEqual(comparable(reference));
    // Phases in order: the upload and the worker's reading, then writing, then done (JSON-lines contract of http.ts).
    const phases = events.filter((e) => e.type === 'progress').map((e) => (e.type === 'progress' ? e.phase : ''));
    expect(phases[0]).toBe('reading');
    expect(phases.at(-1)).toBe('done');
    expect([...phases].sort((a, b) => order(a) - order(b))).toEqual(phases);
    expect(events.at(-2)).toMatchObject({ type: 'progress', phase: 'done', rows: ROWS, written: ROWS });

    expect(await content(target)).toEqual(await content(twin));
    expect(await history(target)).toEqual(await history(twin));
    const batch = await app.client.importBatch.findUniqueOrThrow({ where: { id: last.outcome.batchId ?? '' } });
    expect(batch.status).toBe('applied');
    expect(JSON.parse(batch.outcome ?? 'null')).toEqual({ kind: 'outcome', outcome: last.outcome });
    expect(await app.client.importChunk.count()).toBe(0);
    const audits = await app.client.auditEvent.findMany({ where: { action: 'import.applied', targetId: target } });
    expect(audits.map((a) => JSON.parse(a.detail).batchId)).toEqual([batch.id]);
  });

  it('pipeline API: update mode answers the same JSON; a bad cell is refused with the same problems and writes nothing', async () => {
    const twin = await twinProject('Buoys (pipeline, in-process)');
    const target = await twinProject('Buoys (pipeline, job system)');
    const token = await tokenFor(target);
    const base = bigCsv(ROWS);
    const relabelled = bigCsv(ROWS, { relabelEvery: 7 });
    expect(relabelled.length).toBeGreaterThan(JOB_IMPORT_MIN_BYTES);
    expect((await inProcess(twin, base, 'insert', 'pipeline')).ok).toBe(true);
    const reference = await inProcess(twin, relabelled, 'update', 'pipeline');
    if (!reference.ok) throw new Error('reference update refused');
    // 6,000 rows, every 7th relabelled: ceil(6000 / 7) = 858 (hand-worked).
    expect(reference.relabelled).toBe(858);

    expect((await post(samplesRoute as Handler, target, '?mode=insert', base, { token })).status).toBe(200);
    const res = await post(samplesRoute as Handler, target, '', relabelled, { token });
    expect(res.status).toBe(200);
    const json = (await res.json()) as Record<string, unknown>;
    // The answer's fields: importJsonResponse in lib/server/import/http.ts.
    const { batchId: _b, fitId, ...rest } = json;
    expect(fitId).toEqual(expect.any(String));
    expect(rest).toEqual({
      ok: true,
      format: 'csv',
      mode: 'update',
      rows: ROWS,
      added: 0,
      relabelled: 858,
      updated: 0,
      unchanged: ROWS - 858,
      newClasses: [],
      revision: 1,
    });
    expect(await content(target)).toEqual(await content(twin));

    const bad = bigCsv(ROWS, { badRow: 4_500 });
    const refusedReference = await inProcess(twin, bad, 'update', 'pipeline');
    if (refusedReference.ok) throw new Error('the bad cell was accepted in-process');
    // Row 4502: the header is row 1 and data row i is row i + 2; "x" is the 4th column.
    // Message: DETAIL.notNumber in lib/server/import/problems.ts.
    expect(refusedReference.problems.map((p) => p.message)).toEqual(['Row 4502, column 4 (x): "wide" is not a number.']);
    const before = await content(target);
    const refused = await post(samplesRoute as Handler, target, '', bad, { token });
    expect(refused.status).toBe(400);
    expect(await refused.json()).toEqual({
      ok: false,
      error: refusedReference.problems[0].message,
      problems: refusedReference.problems,
      truncated: refusedReference.truncated,
    });
    expect(await content(target)).toEqual(before);
    // Both projects: the insert, the update, the refusal.
    expect(await history(target)).toEqual(await history(twin));
    expect(await app.client.importChunk.count()).toBe(0);
  });

  it('an upload whose body fails mid-way in the import thread: the same error, its batch and chunks removed', async () => {
    const target = await twinProject('Buoys (broken upload)');
    async function* broken(): AsyncGenerator<Uint8Array> {
      // two 4 MB chunks' worth (the first is written while the second arrives), then the body fails
      for (let i = 0; i < 9; i++) yield new Uint8Array(1024 * 1024).fill(0x61);
      throw new Error('the client went away mid-upload');
    }
    const stored: number[] = [];
    const staging = stageInThread(parseDatabaseUrl(app.t.url, process.cwd()), world.scope, target, { fileName: 'broken.csv', mode: 'insert', address: null }, f.leadA, broken(), {
      onStored: (bytes) => stored.push(bytes),
    });
    await expect(staging).rejects.toThrow('the client went away mid-upload');
    expect(stored[0]).toBe(4 * 1024 * 1024);
    expect(await app.client.importBatch.count({ where: { projectId: target } })).toBe(0);
    expect(await app.client.importChunk.count()).toBe(0);
  });

  it('a job delivered twice changes nothing', async () => {
    const target = await twinProject('Buoys (twice)');
    const res = await post(samplesRoute as Handler, target, '?mode=insert', bigCsv(ROWS), { token: await tokenFor(target) });
    expect(res.status).toBe(200);
    const batch = await app.client.importBatch.findFirstOrThrow({ where: { projectId: target, status: 'applied' } });
    const before = { content: await content(target), history: await history(target), audits: await app.client.auditEvent.count() };
    const jobId = await sendImport(workerBoss, { batchId: batch.id });
    if (jobId === null) throw new Error('the job was not sent');
    for (let i = 0; i < 100; i++) {
      const job = await workerBoss.getJobById(JOB_QUEUES.import, jobId);
      if (job?.state === 'completed') break;
      await new Promise((r) => setTimeout(r, 100));
    }
    expect((await workerBoss.getJobById(JOB_QUEUES.import, jobId))?.state).toBe('completed');
    expect({ content: await content(target), history: await history(target), audits: await app.client.auditEvent.count() }).toEqual(before);
    const rows = await app.client.$queryRawUnsafe<{ n: bigint }[]>(`SELECT count(*) AS n FROM ${JOB_SCHEMA}.job WHERE name = $1`, JOB_QUEUES.import);
    expect(Number(rows[0].n)).toBeGreaterThanOrEqual(2);
  });
});

function order(phase: string): number {
  return ['reading', 'writing', 'done'].indexOf(phase);
}

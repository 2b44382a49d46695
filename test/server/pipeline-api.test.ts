// Pipeline tokens and the HTTP side of the Data area, called as Next calls them (route handlers
// with a Request; server actions inside a request context with a real session cookie):
// tokens are shown once and stored hashed, reach exactly one project (another project's token
// is refused as not found), are refused once revoked or when their creator is no longer a lead;
// the /api/v1 endpoints add samples, read labels and revisions; the Data screen's streaming
// import, image upload and export routes work for a lead and refuse an observer.

import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createPipelineToken } from '@/app/actions/create-pipeline-token';
import { revokePipelineToken } from '@/app/actions/revoke-pipeline-token';
import { POST as importRoute } from '@/app/api/projects/[projectId]/imports/route';
import { POST as imageUploadRoute } from '@/app/api/projects/[projectId]/imports/images/route';
import { GET as exportRoute } from '@/app/api/projects/[projectId]/export/route';
import { GET as imageRoute } from '@/app/api/projects/[projectId]/images/[...path]/route';
import { POST as samplesRoute } from '@/app/api/v1/projects/[projectId]/samples/route';
import { GET as labelsRoute } from '@/app/api/v1/projects/[projectId]/labels/route';
import { GET as revisionsRoute } from '@/app/api/v1/projects/[projectId]/revisions/route';
import type { ImportStreamLine } from '@/lib/server/import/http';
import { snapshot } from './db-harness';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase, type Fixture } from './auth-harness';

let app: AppDatabase;
let f: Fixture;
let dataDir: string;
const cookies: Record<'leadA' | 'observerA' | 'leadB', string> = { leadA: '', observerA: '', leadB: '' };

beforeAll(async () => {
  dataDir = mkdtempSync(join(tmpdir(), 'borderline-data-'));
  process.env.BORDERLINE_DATA_DIR = dataDir;
  app = await openAppDatabase();
  f = await buildFixture(app.client);
  cookies.leadA = await sessionFor(f.leadA);
  cookies.observerA = await sessionFor(f.observerA);
  cookies.leadB = await sessionFor(f.leadB);
});
afterAll(async () => {
  await app.close();
  delete process.env.BORDERLINE_DATA_DIR;
  rmSync(dataDir, { recursive: true, force: true });
});

type Handler = (req: Request, ctx: { params: Promise<Record<string, string | string[]>> }) => Promise<Response>;

function api(handler: Handler, projectId: string, options: { method?: string; token?: string; query?: string; body?: BodyInit; cookie?: string | null; extra?: Record<string, string | string[]> } = {}) {
  const headers: Record<string, string> = {};
  if (options.token !== undefined) headers.authorization = `Bearer ${options.token}`;
  const req = new Request(`http://127.0.0.1/api${options.query ?? ''}`, { method: options.method ?? 'GET', headers, body: options.body });
  return call(contextFor(options.cookie ?? null), () =>
    (handler as Handler)(req, { params: Promise.resolve({ projectId, ...(options.extra ?? {}) }) }),
  );
}

async function jsonOf(res: Response): Promise<Record<string, unknown>> {
  return (await res.json()) as Record<string, unknown>;
}

describe('pipeline tokens', () => {
  it('are created by a lead, shown once, stored as a SHA-256 hash with a 12-character prefix', async () => {
    const r = await call(contextFor(cookies.leadA), () => createPipelineToken({ projectId: f.projectA, name: 'nightly' }));
    if (!r.ok) throw new Error(JSON.stringify(r));
    expect(r.data.secret).toMatch(/^blp_[A-Za-z0-9_-]{43}$/);
    const row = await app.client.pipelineToken.findUniqueOrThrow({ where: { id: r.data.id } });
    // SHA-256 of the secret computed here with node:crypto, independently of lib/server/tokens.ts.
    expect(row.tokenHash).toBe(createHash('sha256').update(r.data.secret).digest('hex'));
    expect(row.prefix).toBe(r.data.secret.slice(0, 12));
    const everything = JSON.stringify((await snapshot(app.t)).data);
    expect(everything.includes(r.data.secret)).toBe(false);
    const audit = await app.client.auditEvent.findFirst({ where: { action: 'token.created', targetId: r.data.id } });
    expect(audit?.detail.includes(r.data.secret)).toBe(false);
  });

  it('are refused to an observer and to another team', async () => {
    const o = await call(contextFor(cookies.observerA), () => createPipelineToken({ projectId: f.projectA, name: 'x' }));
    expect(o).toMatchObject({ ok: false, status: 403 });
    const b = await call(contextFor(cookies.leadB), () => createPipelineToken({ projectId: f.projectA, name: 'x' }));
    expect(b).toMatchObject({ ok: false, status: 404 });
  });
});

describe('the pipeline API', () => {
  it('adds samples (CSV body), makes a revision, and updates lastUsedAt', async () => {
    expect((await app.client.pipelineToken.findUniqueOrThrow({ where: { id: f.tokenA.id } })).lastUsedAt).toBeNull();
    const res = await api(samplesRoute, f.projectA, { method: 'POST', token: f.tokenA.secret, body: 'id,label,x,y\np1,left,0.5,1\np2,right,-1,2\n' });
    expect(res.status).toBe(200);
    expect(await jsonOf(res)).toMatchObject({ ok: true, format: 'csv', mode: 'update', rows: 2, added: 2, revision: 0 });
    expect((await app.client.pipelineToken.findUniqueOrThrow({ where: { id: f.tokenA.id } })).lastUsedAt).not.toBeNull();
  });

  it('updates labels (JSON Lines body) as a new revision', async () => {
    const body = '{"id":"p1","label":"right","features":[0.5,1]}\n{"id":"p3","label":"left","features":[3,3]}\n';
    const res = await api(samplesRoute, f.projectA, { method: 'POST', token: f.tokenA.secret, body });
    expect(await jsonOf(res)).toMatchObject({ ok: true, format: 'jsonl', added: 1, relabelled: 1, revision: 1 });
  });

  it('answers 400 with the problems (row and column) and writes nothing', async () => {
    const before = await snapshot(app.t);
    const res = await api(samplesRoute, f.projectA, { method: 'POST', token: f.tokenA.secret, query: '?mode=insert', body: 'id,label,x,y\np1,left,1,2\n' });
    expect(res.status).toBe(400);
    expect(await jsonOf(res)).toMatchObject({
      ok: false,
      error: 'Row 2, column 1 (id): id "p1" already exists in this project; import in update mode to change it.',
      problems: [{ row: 2, column: '1 (id)' }],
    });
    const after = await snapshot(app.t);
    const { ImportBatch: _a, AuditEvent: _b, PipelineToken: _c, ...restAfter } = after.data;
    const { ImportBatch: _d, AuditEvent: _e, PipelineToken: _f, ...restBefore } = before.data;
    expect(restAfter).toEqual(restBefore);
  });

  it('reads current labels, optionally only those changed since a revision', async () => {
    const all = await (await api(labelsRoute, f.projectA, { token: f.tokenA.secret })).text();
    expect(all.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>)).toEqual([
      { id: 'p1', label: 'right', original_label: 'left', label_revision: 1, added_revision: 0, votes: [], decided_by: null },
      { id: 'p2', label: 'right', original_label: 'right', label_revision: 0, added_revision: 0, votes: [], decided_by: null },
      { id: 'p3', label: 'left', original_label: 'left', label_revision: 1, added_revision: 1, votes: [], decided_by: null },
    ]);
    const since = await (await api(labelsRoute, f.projectA, { token: f.tokenA.secret, query: '?since=0&format=csv' })).text();
    expect(since).toBe(
      '"id","label","original_label","label_revision","added_revision","votes","decided_by"\r\n' +
        '"p1","right","left",1,0,"",""\r\n' +
        '"p3","left","left",1,1,"",""\r\n',
    );
    const bad = await api(labelsRoute, f.projectA, { token: f.tokenA.secret, query: '?since=-1' });
    expect(bad.status).toBe(400);
  });

  it('reads the revisions with their fits', async () => {
    const res = await api(revisionsRoute, f.projectA, { token: f.tokenA.secret });
    const body = (await res.json()) as { number: number; kind: string; fit: { status: string } | null }[];
    expect(body.map((r) => [r.number, r.kind, r.fit?.status])).toEqual([
      [0, 'import', 'queued'],
      [1, 'update', 'queued'],
    ]);
  });

  it("refuses a token of another team's project as not found, and a token on its team's other project", async () => {
    const before = await snapshot(app.t);
    for (const [handler, method, body] of [
      [samplesRoute, 'POST', 'id,label,x,y\nz1,left,1,1\n'],
      [labelsRoute, 'GET', undefined],
      [revisionsRoute, 'GET', undefined],
    ] as const) {
      const res = await api(handler, f.projectA, { method, token: f.tokenB.secret, body });
      expect(res.status).toBe(404);
      expect(await jsonOf(res)).toEqual({ error: 'Not found. It may have been removed, or you may not have access to it.' });
    }
    expect((await api(labelsRoute, f.projectB, { token: f.tokenA.secret })).status).toBe(404);
    const sibling = await app.client.project.create({ data: { teamId: f.teamA, name: 'Sibling', featureCount: 2, settings: '{}' } });
    expect((await api(labelsRoute, sibling.id, { token: f.tokenA.secret })).status).toBe(404);
    await app.client.project.delete({ where: { id: sibling.id } });
    const after = await snapshot(app.t);
    expect(after.data.Sample).toEqual(before.data.Sample);
  });

  it('refuses missing, made-up and revoked tokens (401), and sessions', async () => {
    expect((await api(labelsRoute, f.projectA, {})).status).toBe(401);
    expect((await api(labelsRoute, f.projectA, { cookie: cookies.leadA })).status).toBe(401);
    expect((await api(labelsRoute, f.projectA, { token: `blp_${'A'.repeat(43)}` })).status).toBe(401);
    const revoked = await api(labelsRoute, f.projectA, { token: f.revokedTokenA.secret });
    expect(revoked.status).toBe(401);
    expect(await jsonOf(revoked)).toEqual({ error: 'This pipeline token was revoked.' });
  });

  it('stops a token when a lead revokes it', async () => {
    const created = await call(contextFor(cookies.leadA), () => createPipelineToken({ projectId: f.projectA, name: 'short-lived' }));
    if (!created.ok) throw new Error('create failed');
    expect((await api(labelsRoute, f.projectA, { token: created.data.secret })).status).toBe(200);
    const byOther = await call(contextFor(cookies.leadB), () => revokePipelineToken({ tokenId: created.data.id }));
    expect(byOther).toMatchObject({ ok: false, status: 404 });
    const r = await call(contextFor(cookies.leadA), () => revokePipelineToken({ tokenId: created.data.id }));
    expect(r).toMatchObject({ ok: true });
    expect((await api(labelsRoute, f.projectA, { token: created.data.secret })).status).toBe(401);
  });

  it('stops a token whose creator is no longer a lead (403)', async () => {
    const g = await buildFixture(app.client, new Date(), '-demoted');
    expect((await api(labelsRoute, g.projectA, { token: g.tokenA.secret })).status).toBe(200);
    await app.client.membership.update({ where: { id: g.membershipLeadA }, data: { role: 'reviewer' } });
    const res = await api(labelsRoute, g.projectA, { token: g.tokenA.secret });
    expect(res.status).toBe(403);
    expect(await jsonOf(res)).toEqual({ error: 'The lead who created this token is no longer a lead of the team. A lead must create a new token.' });
  });
});

describe('the Data screen routes', () => {
  it('streams an import with progress lines and the outcome, for a lead', async () => {
    const g = await buildFixture(app.client, new Date(), '-screen');
    const cookie = await sessionFor(g.leadA);
    const lines = ['id,label,x,y'];
    for (let i = 0; i < 1500; i++) lines.push(`d${i},${i % 2 ? 'left' : 'right'},${i},${-i}`);
    const res = await api(importRoute, g.projectA, { method: 'POST', cookie, query: '?fileName=screen.csv', body: lines.join('\n') });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('application/x-ndjson; charset=utf-8');
    const events = (await res.text()).trim().split('\n').map((l) => JSON.parse(l) as ImportStreamLine);
    expect(events.some((e) => e.type === 'progress' && e.phase === 'reading')).toBe(true);
    const last = events.at(-1);
    expect(last).toMatchObject({ type: 'result', outcome: { ok: true, added: 1500, fileName: 'screen.csv', revisionNumber: 0 } });
    expect(await app.client.sample.count({ where: { projectId: g.projectA } })).toBe(1500);
  });

  it('refuses the import to an observer before reading the file', async () => {
    const res = await api(importRoute, f.projectA, { method: 'POST', cookie: cookies.observerA, body: 'id,label,x,y\nq,left,1,1\n' });
    expect(res.status).toBe(403);
  });

  it('stores an uploaded image under a generated name and links it from the imported sample', async () => {
    const g = await buildFixture(app.client, new Date(), '-images');
    const cookie = await sessionFor(g.leadA);
    // A PNG signature (89 50 4E 47 0D 0A 1A 0A, from the PNG specification) and a few bytes.
    const png = Uint8Array.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13, 1, 2, 3]);
    const batch = 'batch-0123456789abcdef';
    const up = await api(imageUploadRoute, g.projectA, { method: 'POST', cookie, query: `?uploadBatch=${batch}&name=../../etc/cat.png`, body: png });
    expect(up.status).toBe(200);
    const { ref } = (await up.json()) as { ref: string };
    expect(ref).toMatch(new RegExp(`^upload:${batch}/[0-9a-f]{32}\\.png$`));
    const notImage = await api(imageUploadRoute, g.projectA, { method: 'POST', cookie, query: `?uploadBatch=${batch}&name=x.png`, body: 'id,label\n1,2\n' });
    expect(notImage.status).toBe(400);
    const res = await api(importRoute, g.projectA, {
      method: 'POST',
      cookie,
      query: `?uploadBatch=${batch}`,
      body: 'id,label,image,x,y\ni1,left,../../etc/cat.png,1,1\ni2,right,https://img.example/2.jpg,2,2\n',
    });
    const last = (await res.text()).trim().split('\n').map((l) => JSON.parse(l) as ImportStreamLine).at(-1);
    expect(last).toMatchObject({ type: 'result', outcome: { ok: true, added: 2 } });
    const samples = await app.client.sample.findMany({ where: { projectId: g.projectA }, orderBy: { externalId: 'asc' } });
    expect(samples.map((s) => s.imageRef)).toEqual([ref, 'https://img.example/2.jpg']);
    const [refBatch, file] = ref.slice('upload:'.length).split('/');
    const img = await api(imageRoute, g.projectA, { cookie, extra: { path: [refBatch, file] } });
    expect(img.status).toBe(200);
    expect(img.headers.get('content-type')).toBe('image/png');
    expect(new Uint8Array(await img.arrayBuffer())).toEqual(png);
    const stranger = await api(imageRoute, g.projectA, { cookie: cookies.leadB, extra: { path: [refBatch, file] } });
    expect(stranger.status).toBe(404);
  });

  it('downloads the export as an attachment (CSV, JSON Lines, audit report)', async () => {
    const csv = await api(exportRoute, f.projectA, { cookie: cookies.leadA, query: '?format=csv&features=1' });
    expect(csv.status).toBe(200);
    expect(csv.headers.get('content-disposition')).toMatch(/^attachment; filename="Harbour-buoys-labels-\d{4}-\d{2}-\d{2}\.csv"$/);
    expect((await csv.text()).split('\r\n')[0]).toBe(
      '"id","label","original_label","label_revision","added_revision","votes","decided_by","text","image","f0","f1"',
    );
    const report = await api(exportRoute, f.projectA, { cookie: cookies.leadA, query: '?format=report' });
    expect(((await report.json()) as { format: string }).format).toBe('borderline-audit-report');
    expect((await api(exportRoute, f.projectA, { cookie: cookies.observerA, query: '?format=csv' })).status).toBe(403);
    expect((await api(exportRoute, f.projectA, { cookie: cookies.leadB, query: '?format=csv' })).status).toBe(404);
  });
});

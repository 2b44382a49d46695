// Export: round trips (import → export → import gives identical samples and labels, features
// byte-identical), OWASP CSV-injection neutralising, provenance (votes that decided a label),
// the `since` filter, and the audit report's agreement figures (hand-worked below).

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { exportLabels } from '@/lib/server/export/labels';
import { auditReport } from '@/lib/server/export/report';
import { newProject, openImportWorld, runImport, type ImportWorld } from './import-helpers';

let w: ImportWorld;
beforeAll(async () => {
  w = await openImportWorld();
});
afterAll(async () => {
  await w.close();
});

async function collect(chunks: AsyncIterable<string>): Promise<string> {
  let s = '';
  for await (const c of chunks) s += c;
  return s;
}

async function samplesOf(projectId: string) {
  const rows = await w.db.sample.findMany({ where: { projectId }, orderBy: { externalId: 'asc' } });
  return rows.map((s) => ({
    externalId: s.externalId,
    originalLabel: s.originalLabel,
    currentLabel: s.currentLabel,
    text: s.text,
    imageRef: s.imageRef,
    metadata: s.metadata,
    features: Buffer.from(s.features).toString('hex'),
  }));
}

async function ok(p: Promise<Awaited<ReturnType<typeof runImport>>>) {
  const r = await p;
  if (!r.ok) throw new Error(JSON.stringify(r.problems));
  return r;
}

// Values chosen to stress the decimal ↔ float32 round trip: negative zero, the smallest
// subnormal float32 (2^-149), the largest finite float32, and a value with 9 significant digits.
const SOURCE_CSV = [
  'id,label,text,image,meta.source,meta.lang,f0,f1,f2',
  'a1,refund,"Refund, please","https://img.example/a.png",web,en,-0,1.4e-45,3.4028235e38',
  'a2,shipping,"Line one\nline two",,mail,,0.1,-2.5,16777217',
  'a3,refund,,,,,1.17549435e-38,-1e-7,0.333333343',
].join('\n');

describe('round trip: import → export → import', () => {
  for (const format of ['csv', 'jsonl'] as const) {
    it(`${format}: identical samples and labels, features byte-identical, second export identical`, async () => {
      const a = await newProject(w, { featureCount: 3 });
      await ok(runImport(w, a, SOURCE_CSV));
      const exported = await collect(exportLabels(w.scope, a, { format, features: true, client: w.db }));
      const b = await newProject(w, { featureCount: 3 });
      await ok(runImport(w, b, exported, { fileName: `export.${format}` }));
      expect(await samplesOf(b)).toEqual(await samplesOf(a));
      const again = await collect(exportLabels(w.scope, b, { format, features: true, client: w.db }));
      expect(again).toBe(exported);
    });
  }

  it('keeps relabelled samples: current label, original label and the revision of the change', async () => {
    const a = await newProject(w, { featureCount: 1 });
    await ok(runImport(w, a, 'id,label,x\nr1,cat,1\nr2,cat,2\n'));
    await ok(runImport(w, a, 'id,label,x\nr1,dog,1\nr2,cat,2\n', { mode: 'update' }));
    const jsonl = await collect(exportLabels(w.scope, a, { format: 'jsonl', client: w.db }));
    expect(jsonl.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>).sort((x, y) => String(x.id).localeCompare(String(y.id)))).toEqual([
      { id: 'r1', label: 'dog', original_label: 'cat', label_revision: 1, added_revision: 0, votes: [], decided_by: null },
      { id: 'r2', label: 'cat', original_label: 'cat', label_revision: 0, added_revision: 0, votes: [], decided_by: null },
    ]);
    // Re-imported into a fresh project, the export's current labels are the labels.
    const csv = await collect(exportLabels(w.scope, a, { format: 'csv', features: true, client: w.db }));
    const b = await newProject(w, { featureCount: 1 });
    await ok(runImport(w, b, csv));
    expect((await samplesOf(b)).map((s) => [s.externalId, s.currentLabel, s.features])).toEqual(
      (await samplesOf(a)).map((s) => [s.externalId, s.currentLabel, s.features]),
    );
  });
});

describe('CSV injection (OWASP): formula-like cells are neutralised, and the importer reverses it', () => {
  it('prefixes = + - @ tab CR with an apostrophe in every text cell, leaves numbers bare', async () => {
    const p = await newProject(w, { featureCount: 2 });
    const jsonl = [
      { id: '=HYPERLINK("http://x.example","go")', label: '+cmd', text: '-2+3', meta: { note: '@SUM(A1)' }, features: [-1.5, 2] },
      { id: '@home', label: '-minus', text: "\tTAB \rCR", meta: { note: "'=already" }, features: [0, -0.25] },
      { id: 'safe', label: 'fine', text: 'a=b', meta: {}, features: [1, 1] },
    ]
      .map((o) => JSON.stringify(o))
      .join('\n');
    await ok(runImport(w, p, jsonl, { fileName: 'evil.jsonl' }));
    const csv = await collect(exportLabels(w.scope, p, { format: 'csv', features: true, client: w.db }));
    const lines = csv.split('\r\n');
    // Header, then rows in database id order: find them by their (neutralised) first cell.
    expect(lines[0]).toBe('"id","label","original_label","label_revision","added_revision","votes","decided_by","text","image","meta.note","f0","f1"');
    const row = (start: string) => lines.find((l) => l.startsWith(start));
    // Written out by hand: quote doubling per RFC 4180, apostrophe per OWASP CSV Injection.
    expect(row('"\'=HYPERLINK')).toBe(
      '"\'=HYPERLINK(""http://x.example"",""go"")","\'+cmd","\'+cmd",0,0,"","","\'-2+3","","\'@SUM(A1)",-1.5,2',
    );
    expect(row('"\'@home"')).toBe('"\'@home","\'-minus","\'-minus",0,0,"","","\'\tTAB \rCR","","\'\'=already",0,-0.25');
    expect(row('"safe"')).toBe('"safe","fine","fine",0,0,"","","a=b","","",1,1');
    const q = await newProject(w, { featureCount: 2 });
    await ok(runImport(w, q, csv));
    const original = await samplesOf(p);
    expect((await samplesOf(q)).map((s) => [s.externalId, s.currentLabel, s.text, s.metadata, s.features])).toEqual(
      original.map((s) => [s.externalId, s.currentLabel, s.text, s.metadata, s.features]),
    );
    expect(original.map((s) => s.externalId).sort()).toEqual(['=HYPERLINK("http://x.example","go")', '@home', 'safe']);
  });
});

describe('provenance and the audit report', () => {
  let p: string;
  let reviewerA: string;
  let reviewerB: string;

  beforeAll(async () => {
    p = await newProject(w, { featureCount: 1 });
    await ok(runImport(w, p, 'id,label,x\nv1,cat,1\nv2,cat,2\nv3,dog,3\nv4,dog,4\n'));
    reviewerA = (await w.db.user.create({ data: { email: 'ana@tidewater.example', name: 'Ana', passwordHash: 'x' } })).id;
    reviewerB = (await w.db.user.create({ data: { email: 'ben@tidewater.example', name: 'Ben', passwordHash: 'x' } })).id;
    const sample = async (externalId: string) => w.db.sample.findFirstOrThrow({ where: { projectId: p, externalId } });
    const rev0 = await w.db.revision.findFirstOrThrow({ where: { projectId: p, number: 0 } });
    await w.db.fit.updateMany({
      where: { projectId: p, revisionNumber: 0 },
      data: { status: 'done', formulation: 'smo-unregularised-bias', metrics: '{"marginWidth":0.42,"wrongSide":3}' },
    });
    // Item 1 (v1): both relabel to dog → agreed, relabelled in revision 1.
    // Item 2 (v2): keep vs relabel → split, the lead keeps it (tiebreak).
    // Item 3 (v3): both keep → agreed, kept.
    const item = async (externalId: string, votes: [string, string, string | null][], outcome: 'kept' | 'relabelled', tiebreak: boolean) => {
      const s = await sample(externalId);
      const qi = await w.db.queueItem.create({
        data: {
          projectId: p,
          sampleId: s.id,
          revisionNumber: 0,
          state: 'closed',
          outcome,
          suspicion: 1,
          finalLabel: outcome === 'relabelled' ? 'dog' : s.currentLabel,
          tiebreakById: tiebreak ? w.userId : null,
          closedAt: new Date(),
        },
      });
      let t = Date.parse('2026-01-01T00:00:00Z');
      for (const [userId, decision, label] of votes) {
        await w.db.vote.create({ data: { queueItemId: qi.id, userId, decision, label, createdAt: new Date((t += 1000)) } });
      }
      return { qi, s };
    };
    const one = await item('v1', [[reviewerA, 'relabel', 'dog'], [reviewerB, 'relabel', 'dog']], 'relabelled', false);
    await item('v2', [[reviewerA, 'keep', null], [reviewerB, 'relabel', 'dog']], 'kept', true);
    await item('v3', [[reviewerB, 'keep', null], [reviewerA, 'keep', null]], 'kept', false);
    const rev1 = await w.db.revision.create({ data: { projectId: p, number: 1, kind: 'review', changeCount: 1 } });
    await w.db.labelChange.create({
      data: { projectId: p, sampleId: one.s.id, revisionId: rev1.id, revisionNumber: 1, fromLabel: 'cat', toLabel: 'dog', queueItemId: one.qi.id },
    });
    await w.db.sample.update({ where: { id: one.s.id }, data: { currentLabel: 'dog', labelRevision: 1 } });
    await w.db.project.update({ where: { id: p }, data: { currentRevision: 1 } });
    expect(rev0.number).toBe(0);
  });

  it('exports the votes that decided each label (JSON Lines and CSV)', async () => {
    const jsonl = await collect(exportLabels(w.scope, p, { format: 'jsonl', client: w.db }));
    const byId = Object.fromEntries(jsonl.trim().split('\n').map((l) => {
      const o = JSON.parse(l) as { id: string; votes: unknown[] };
      return [o.id, o];
    }));
    expect(byId.v1).toEqual({
      id: 'v1',
      label: 'dog',
      original_label: 'cat',
      label_revision: 1,
      added_revision: 0,
      votes: [
        { voter: 'ana@tidewater.example', decision: 'relabel', label: 'dog' },
        { voter: 'ben@tidewater.example', decision: 'relabel', label: 'dog' },
      ],
      decided_by: null,
    });
    expect(byId.v2).toMatchObject({ label: 'cat', decided_by: 'lead@tidewater.example' });
    expect(byId.v3.votes).toEqual([
      { voter: 'ben@tidewater.example', decision: 'keep', label: null },
      { voter: 'ana@tidewater.example', decision: 'keep', label: null },
    ]);
    expect(byId.v4).toMatchObject({ votes: [], decided_by: null });
    const csv = await collect(exportLabels(w.scope, p, { format: 'csv', client: w.db }));
    expect(csv.split('\r\n').find((l) => l.startsWith('"v1"'))).toBe(
      '"v1","dog","cat",1,0,"ana@tidewater.example relabel dog; ben@tidewater.example relabel dog",""',
    );
  });

  it('exports only labels changed since a revision', async () => {
    const jsonl = await collect(exportLabels(w.scope, p, { format: 'jsonl', since: 0, client: w.db }));
    expect(jsonl.trim().split('\n').map((l) => (JSON.parse(l) as { id: string }).id)).toEqual(['v1']);
    expect(await collect(exportLabels(w.scope, p, { format: 'jsonl', since: 1, client: w.db }))).toBe('');
  });

  it('reports revisions with fit metrics and the agreement figures', async () => {
    const report = await auditReport(w.scope, p, { client: w.db, now: new Date('2026-02-03T04:05:06Z') });
    expect(report.project).toMatchObject({ currentRevision: 1, samples: 4, relabelledSinceImport: 1 });
    expect(report.project.classes).toEqual([
      { name: 'cat', samples: 1 },
      { name: 'dog', samples: 3 },
    ]);
    expect(report.revisions.map((r) => [r.number, r.kind, r.labelChanges, r.fit?.status ?? null])).toEqual([
      [0, 'import', 0, 'done'],
      [1, 'review', 1, null],
    ]);
    expect(report.revisions[0].fit?.metrics).toEqual({ marginWidth: 0.42, wrongSide: 3 });
    // Hand-worked: 3 items with two votes each; items 1 and 3 agree, item 2 does not → 2/3 = 66.67 %.
    // Votes: 6 in all, keep 3 (v2 ana, v3 ben, v3 ana), relabel 3.
    expect(report.agreement).toEqual({
      itemsClosed: 3,
      pairs: 3,
      agreeingPairs: 2,
      percentAgreement: 66.67,
      votes: { total: 6, keep: 3, relabel: 3 },
      outcomes: { kept: 2, relabelled: 1 },
      tiebreaks: 1,
      splitOpen: 0,
      cohensKappa: null,
    });
  });

  it("refuses another team's project", async () => {
    const other = await w.db.team.create({ data: { name: 'Other shore' } });
    const foreign = await w.db.project.create({ data: { teamId: other.id, name: 'Theirs', featureCount: 1, settings: '{}' } });
    await expect(collect(exportLabels(w.scope, foreign.id, { format: 'csv', client: w.db }))).rejects.toMatchObject({ status: 404 });
    await expect(auditReport(w.scope, foreign.id, { client: w.db })).rejects.toMatchObject({ status: 404 });
  });
});

describe('projects larger than one query batch', () => {
  // The SQLite driver refuses more than 999 bound parameters per query; 1,234 samples make every
  // page, provenance lookup and update-mode lookup cross that line unless they are chunked.
  it('exports, and updates in update mode, 1,234 samples', async () => {
    const p = await newProject(w, { featureCount: 1 });
    const rows = Array.from({ length: 1234 }, (_, i) => `b${String(i).padStart(4, '0')},cat,${i}`);
    await ok(runImport(w, p, `id,label,x\n${rows.join('\n')}\n`));
    const relabelled = rows.map((r) => r.replace(',cat,', ',dog,'));
    const r = await ok(runImport(w, p, `id,label,x\n${relabelled.join('\n')}\n`, { mode: 'update' }));
    expect(r).toMatchObject({ relabelled: 1234, revisionNumber: 1 });
    const jsonl = await collect(exportLabels(w.scope, p, { format: 'jsonl', client: w.db }));
    const lines = jsonl.trim().split('\n').map((l) => JSON.parse(l) as { id: string; label: string; original_label: string });
    expect(lines).toHaveLength(1234);
    expect(lines[0]).toMatchObject({ id: 'b0000', label: 'dog', original_label: 'cat' });
    expect(lines[1233]).toMatchObject({ id: 'b1233', label: 'dog' });
    expect(new Set(lines.map((l) => l.id)).size).toBe(1234);
  });
});

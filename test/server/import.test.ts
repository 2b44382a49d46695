// Import: happy paths (CSV, JSON Lines, update mode, revisions, fits) and every validation
// problem with its exact message. Runs on SQLite, or PostgreSQL with BORDERLINE_TEST_DATABASE=postgres.
//
// Expected messages are written out by hand below (the product's wording for each case, and
// the positions worked out from the input text shown next to each check).

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { decodeFeatures } from '@/lib/server/features';
import type { ImportOutcome } from '@/lib/server/import';
import { newProject, openImportWorld, projectState, runImport, type ImportWorld } from './import-helpers';

let w: ImportWorld;
beforeAll(async () => {
  w = await openImportWorld();
});
afterAll(async () => {
  await w.close();
});

function problemsOf(r: ImportOutcome): string[] {
  if (r.ok) throw new Error(`expected a refusal, got ${JSON.stringify(r)}`);
  return r.problems.map((p) => p.message);
}

function okOf(r: ImportOutcome) {
  if (!r.ok) throw new Error(`expected success, got ${JSON.stringify(r.problems)}`);
  return r;
}

describe('successful imports', () => {
  it('imports CSV with text, image URL and metadata; first import is revision 0 and queues a fit', async () => {
    const p = await newProject(w, { featureCount: 3 });
    const csv = [
      'id,label,text,image,meta.source,f1,f2,f3',
      's1,refund,"Where is my money, please?",https://img.example/1.png,web,0.5,-1.25,3e-2',
      's2,shipping,"He said ""soon""",,mail,1,2,3',
      '"s3",refund,"two',
      'lines",,,-0,0.1,7',
    ].join('\r\n');
    const r = okOf(await runImport(w, p, csv, { chunk: 3 }));
    expect(r).toMatchObject({ format: 'csv', rows: 3, added: 3, revisionNumber: 0, newClasses: ['refund', 'shipping'] });
    const s = await projectState(w, p);
    expect(s.project?.currentRevision).toBe(0);
    expect(s.classes).toEqual([
      { name: 'refund', position: 0 },
      { name: 'shipping', position: 1 },
    ]);
    expect(s.revisions.map((x) => [x.number, x.kind, x.changeCount])).toEqual([[0, 'import', 3]]);
    expect(s.fits.map((f) => [f.status, f.revisionNumber])).toEqual([['queued', 0]]);
    const byId = Object.fromEntries(s.samples.map((x) => [x.externalId, x]));
    expect(byId.s1).toMatchObject({
      text: 'Where is my money, please?',
      imageRef: 'https://img.example/1.png',
      metadata: '{"source":"web"}',
      originalLabel: 'refund',
      currentLabel: 'refund',
      labelRevision: 0,
      addedRevision: 0,
    });
    expect(byId.s2).toMatchObject({ text: 'He said "soon"', imageRef: null, metadata: '{"source":"mail"}' });
    expect(byId.s3).toMatchObject({ text: 'two\r\nlines', metadata: null });
    // Features as float32 little-endian: 0.5, -1.25, 0.03 rounded to float32 (Math.fround).
    const rows = await w.db.sample.findMany({ where: { projectId: p }, orderBy: { externalId: 'asc' } });
    expect(Array.from(decodeFeatures(rows[0].features, 3))).toEqual([0.5, -1.25, Math.fround(0.03)]);
    expect(Object.is(decodeFeatures(rows[2].features, 3)[0], -0)).toBe(true);
    const batches = await w.db.importBatch.findMany({ where: { projectId: p } });
    expect(batches.map((b) => [b.status, b.rowCount, b.revisionNumber, b.format, b.mode])).toEqual([['applied', 3, 0, 'csv', 'insert']]);
  });

  it('imports JSON Lines with features arrays, meta objects and meta.* fields', async () => {
    const p = await newProject(w, { featureCount: 2 });
    const jsonl =
      '{"id":"j1","label":"a","features":[1,2],"text":"hi","meta":{"n":3,"ok":true},"meta.src":"api"}\n' +
      '\n' +
      '{"id":7,"label":"b","features":[0.25,-4],"image":null}\n';
    const r = okOf(await runImport(w, p, jsonl, { fileName: 'x.jsonl', chunk: 5 }));
    expect(r).toMatchObject({ format: 'jsonl', rows: 2, added: 2 });
    const s = await projectState(w, p);
    expect(s.samples.map((x) => [x.externalId, x.currentLabel, x.text, x.metadata])).toEqual([
      ['7', 'b', null, null],
      ['j1', 'a', 'hi', '{"n":3,"ok":true,"src":"api"}'],
    ]);
  });

  it('takes only prefixed columns as features when a prefix is chosen', async () => {
    const p = await newProject(w, { featureCount: 2 });
    const r = okOf(await runImport(w, p, 'id,label,notes,emb_0,emb_1\nq1,x,ignored,1,2\n', { featurePrefix: 'emb_' }));
    expect(r.added).toBe(1);
    const rows = await w.db.sample.findMany({ where: { projectId: p } });
    expect(Array.from(decodeFeatures(rows[0].features, 2))).toEqual([1, 2]);
  });

  it('reads a CSV "features" column holding a JSON array', async () => {
    const p = await newProject(w, { featureCount: 3 });
    okOf(await runImport(w, p, 'id,label,features\nv1,x,"[1, 2.5, -3]"\n'));
    const rows = await w.db.sample.findMany({ where: { projectId: p } });
    expect(Array.from(decodeFeatures(rows[0].features, 3))).toEqual([1, 2.5, -3]);
  });

  it('update mode: adds new ids, relabels existing ones with LabelChange rows, makes revision N+1 of kind update', async () => {
    const p = await newProject(w, { featureCount: 2 });
    okOf(await runImport(w, p, 'id,label,a,b\nu1,cat,1,1\nu2,cat,2,2\nu3,dog,3,3\n'));
    const r = okOf(await runImport(w, p, 'id,label,a,b\nu1,dog,1,1\nu2,cat,2,9\nu3,dog,3,3\nu4,bird,4,4\n', { mode: 'update' }));
    // u1: label cat→dog; u2: feature changed only; u3: unchanged; u4: new.
    expect(r).toMatchObject({ revisionNumber: 1, added: 1, relabelled: 1, updated: 1, unchanged: 1, newClasses: ['bird'] });
    const s = await projectState(w, p);
    expect(s.project?.currentRevision).toBe(1);
    expect(s.revisions.map((x) => [x.number, x.kind, x.changeCount])).toEqual([
      [0, 'import', 3],
      [1, 'update', 2],
    ]);
    const byId = Object.fromEntries(s.samples.map((x) => [x.externalId, x]));
    expect(byId.u1).toMatchObject({ originalLabel: 'cat', currentLabel: 'dog', labelRevision: 1, addedRevision: 0 });
    expect(byId.u2).toMatchObject({ currentLabel: 'cat', labelRevision: 0 });
    expect(byId.u4).toMatchObject({ originalLabel: 'bird', labelRevision: 1, addedRevision: 1 });
    expect(s.changes.map((c) => [c.sampleId === byId.u1.id, c.fromLabel, c.toLabel, c.revisionNumber, c.decidedById])).toEqual([
      [true, 'cat', 'dog', 1, w.userId],
    ]);
    expect(s.fits.map((f) => [f.status, f.revisionNumber])).toEqual([
      ['queued', 0],
      ['queued', 1],
    ]);
  });

  it('an update that changes nothing makes no revision and queues no fit', async () => {
    const p = await newProject(w, { featureCount: 1 });
    okOf(await runImport(w, p, 'id,label,a\nn1,x,1\n'));
    const before = await projectState(w, p);
    const r = okOf(await runImport(w, p, 'id,label,a\nn1,x,1\n', { mode: 'update' }));
    expect(r).toMatchObject({ revisionNumber: null, fitId: null, added: 0, unchanged: 1 });
    expect(await projectState(w, p)).toEqual(before);
  });

  it('takes the feature count from the first import when the project has none yet', async () => {
    const p = await newProject(w, { featureCount: 0 });
    okOf(await runImport(w, p, 'id,label,a,b,c,d\nz1,x,1,2,3,4\n'));
    expect((await projectState(w, p)).project?.featureCount).toBe(4);
  });

  it('gives the same result whatever the chunk boundaries (1-byte chunks)', async () => {
    const p = await newProject(w, { featureCount: 2 });
    okOf(await runImport(w, p, '\uFEFFid,label,a,b\r\nc1,"x, y",1,2\r\nc2,é,3,4\r\n', { chunk: 1 }));
    const s = await projectState(w, p);
    expect(s.samples.map((x) => [x.externalId, x.currentLabel])).toEqual([
      ['c1', 'x, y'],
      ['c2', 'é'],
    ]);
  });

  it('reports progress while reading and writing', async () => {
    const p = await newProject(w, { featureCount: 1 });
    const lines = ['id,label,a'];
    for (let i = 0; i < 3000; i++) lines.push(`g${i},x,${i}`);
    const seen: string[] = [];
    okOf(await runImport(w, p, lines.join('\n'), { onProgress: (pr) => seen.push(`${pr.phase}:${pr.rows}`), progressEveryMs: 0, batchSize: 500 }));
    expect(seen).toContain('reading:3000');
    expect(seen.at(-1)).toBe('done:3000');
    expect(seen.some((x) => x.startsWith('writing'))).toBe(true);
  });
});

describe('every validation problem has its exact message, and nothing is written', () => {
  let p: string;
  beforeAll(async () => {
    p = await newProject(w, { featureCount: 3, maxClasses: 3 });
    okOf(await runImport(w, p, 'id,label,a,b,c\ns1,cat,1,2,3\n'));
  });

  const cases: [string, string | Uint8Array, string[], { mode?: 'insert' | 'update' }?][] = [
    // "s2,dog,4,5" has 4 cells; the header has 5, so the 5th column (c) is missing.
    ['ragged (short)', 'id,label,a,b,c\ns2,dog,4,5\n', ['Row 2, column 5 (c): missing value: the row has 4 columns, the header has 5.']],
    ['ragged (long)', 'id,label,a,b,c\ns2,dog,4,5,6,7\n', ['Row 2, column 6: extra value: the row has 6 columns, the header has 5.']],
    ['empty number', 'id,label,a,b,c\ns2,dog,4,,6\n', ['Row 2, column 4 (b): empty value; a number is required.']],
    ['non-numeric', 'id,label,a,b,c\ns2,dog,4,abc,6\n', ['Row 2, column 4 (b): "abc" is not a number.']],
    ['hexadecimal', 'id,label,a,b,c\ns2,dog,0x10,5,6\n', ['Row 2, column 3 (a): "0x10" is not a number.']],
    ['NaN', 'id,label,a,b,c\ns2,dog,NaN,5,6\n', ['Row 2, column 3 (a): "NaN" is not a finite number.']],
    ['-Infinity', 'id,label,a,b,c\ns2,dog,4,5,-Infinity\n', ['Row 2, column 5 (c): "-Infinity" is not a finite number.']],
    // 1e39 > 3.4028235e38, the largest float32 (IEEE 754 binary32).
    ['beyond float32', 'id,label,a,b,c\ns2,dog,1e39,5,6\n', ['Row 2, column 3 (a): "1e39" is outside the range of 32-bit floats.']],
    ['feature count (CSV header)', 'id,label,a,b\ns2,dog,4,5\n', ['Row 1: the file has 2 feature columns; the project expects 3.']],
    ['feature count (JSON Lines)', '{"id":"s2","label":"dog","features":[1,2]}\n', ['Row 1, field features: has 2 values; the project expects 3 features.']],
    ['duplicate id in the file', 'id,label,a,b,c\ns2,dog,1,2,3\ns3,dog,1,2,3\ns2,cat,1,2,3\n', ['Row 4, column 1 (id): duplicate id "s2" (first on row 2).']],
    ['id already in the project', 'id,label,a,b,c\ns1,cat,1,2,3\n', ['Row 2, column 1 (id): id "s1" already exists in this project; import in update mode to change it.']],
    // Existing class: cat. New: dog (2), eel (3), fox (4 > 3).
    ['too many classes', 'id,label,a,b,c\ns2,dog,1,2,3\ns3,eel,1,2,3\ns4,fox,1,2,3\n', ['Row 4, column 2 (label): "fox" would be class 4; this project allows at most 3 classes.']],
    ['empty id', 'id,label,a,b,c\n,dog,1,2,3\n', ['Row 2, column 1 (id): empty id.']],
    ['empty label', 'id,label,a,b,c\ns2,,1,2,3\n', ['Row 2, column 2 (label): empty label.']],
    // Bytes: "id,label,a,b,c\n" is 15 bytes, "s2,caf" 6 more, so 0xE9 (Latin-1 é) sits at offset 21 on line 2.
    [
      'not UTF-8',
      Uint8Array.from([...Buffer.from('id,label,a,b,c\ns2,caf'), 0xe9, ...Buffer.from(',1,2,3\n')]),
      ['Line 2: the file is not UTF-8 text (byte 0xE9 at offset 21). Save it as UTF-8 and try again.'],
    ],
    [
      'a ZIP archive (.xlsx)',
      Uint8Array.from([0x50, 0x4b, 0x03, 0x04, 0x14, 0x00, 0x06, 0x00]),
      ['The file is neither CSV nor JSON Lines: it is a ZIP archive (a spreadsheet workbook such as .xlsx is one). Save the sheet as CSV.'],
    ],
    ['binary data', Uint8Array.from([0x69, 0x64, 0x2c, 0x78, 0x00, 0x01]), ['The file is neither CSV nor JSON Lines: it contains binary data (a NUL byte at byte 5).']],
    ['UTF-16', Uint8Array.from([0xff, 0xfe, 0x69, 0x00, 0x64, 0x00]), ['The file is UTF-16 text. Save it as UTF-8 (CSV UTF-8 in most spreadsheets) and try again.']],
    ['a JSON array', '[{"id":"s2","label":"dog","features":[1,2,3]}]\n', ['The file is a JSON array, not JSON Lines: write one JSON object per line.']],
    ['no commas (tab-separated)', 'id\tlabel\ta\tb\tc\ns2\tdog\t1\t2\t3\n', ['The first line has no commas: the file is neither comma-separated CSV nor JSON Lines.']],
    ['empty file', '', ['The file is empty.']],
    ['blank file', '  \n\n', ['The file is empty.']],
    ['header only', 'id,label,a,b,c\n', ['The file has no data rows.']],
    ['no id column', 'key,label,a,b,c\ns2,dog,1,2,3\n', ['Row 1: no "id" column; the header must name one column id.']],
    ['unnamed column', 'id,label,,a,b,c\ns2,dog,0,1,2,3\n', ['Row 1, column 3: the column has no name; name it or remove it.']],
    ['unclosed quote', 'id,label,a,b,c\ns2,dog,1,2,3\ns3,"dog,1,2,3\n', ['Row 3: a quoted field is not closed before the end of the file.']],
    ['stray quote', 'id,label,a,b,c\ns"2,dog,1,2,3\n', ['Row 2, column 1 (id): a quote inside a field must be doubled ("") and the field enclosed in quotes.']],
    ['image neither URL nor upload', 'id,label,image,a,b,c\ns2,dog,cat.png,1,2,3\n', ['Row 2, column 3 (image): "cat.png" is neither an http(s) URL nor the name of an image uploaded with this import.']],
    ['JSON Lines: not JSON', '{"id":"s2","label":"dog","features":[1,2,3]}\n{"id":"s3",\n', ['Row 2: not valid JSON; each line must be one JSON object.']],
    ['JSON Lines: NaN literal', '{"id":"s2","label":"dog","features":[1,NaN,3]}\n', ['Row 1, field features[1]: NaN is not a finite number (JSON has no NaN or Infinity).']],
    ['JSON Lines: string feature', '{"id":"s2","label":"dog","features":[1,"x",3]}\n', ['Row 1, field features[1]: "x" is not a number.']],
    ['JSON Lines: unknown field', '{"id":"s2","lable":"dog","label":"dog","features":[1,2,3]}\n', ['Row 1, field lable: unknown field "lable"; expected id, label, features, text, image, meta or meta.<name>.']],
    ['JSON Lines: missing label', '{"id":"s2","features":[1,2,3]}\n', ['Row 1: missing "label".']],
    ['JSON Lines: no features', '{"id":"s2","label":"dog"}\n', ['Row 1: no "features" array; give the features as an array, or choose a feature prefix for flat fields.']],
    [
      'several problems, in file order',
      'id,label,a,b,c\ns2,dog,x,2,3\ns2,dog,1,2,3\n',
      ['Row 2, column 3 (a): "x" is not a number.', 'Row 3, column 1 (id): duplicate id "s2" (first on row 2).'],
    ],
  ];

  for (const [name, input, expected, options] of cases) {
    it(name, async () => {
      const before = await projectState(w, p);
      const r = await runImport(w, p, input, { chunk: 4, ...options });
      expect(problemsOf(r)).toEqual(expected);
      expect(await projectState(w, p)).toEqual(before);
    });
  }

  it('records a refused import as a failed batch with its first problem', async () => {
    const r = await runImport(w, p, 'id,label,a,b,c\ns2,dog,4,abc,6\n', { fileName: 'bad.csv' });
    if (r.ok || r.batchId === null) throw new Error('expected a recorded refusal');
    const batch = await w.db.importBatch.findUniqueOrThrow({ where: { id: r.batchId } });
    expect([batch.status, batch.fileName, batch.error, batch.revisionNumber]).toEqual(['failed', 'bad.csv', 'Row 2, column 4 (b): "abc" is not a number.', null]);
  });

  it('stops after the first 20 problems and says so', async () => {
    const lines = ['id,label,a,b,c'];
    for (let i = 0; i < 50; i++) lines.push(`t${i},cat,x,1,2`);
    const r = await runImport(w, p, lines.join('\n'));
    if (r.ok) throw new Error('expected a refusal');
    expect(r.problems).toHaveLength(20);
    expect(r.problems[19].message).toBe('Row 21, column 3 (a): "x" is not a number.');
    expect(r.truncated).toBe(true);
  });

  it('update mode accepts ids that exist', async () => {
    const q = await newProject(w, { featureCount: 1 });
    okOf(await runImport(w, q, 'id,label,a\nk1,x,1\n'));
    expect(problemsOf(await runImport(w, q, 'id,label,a\nk1,y,1\n'))).toEqual([
      'Row 2, column 1 (id): id "k1" already exists in this project; import in update mode to change it.',
    ]);
    okOf(await runImport(w, q, 'id,label,a\nk1,y,1\n', { mode: 'update' }));
  });
});

describe('scope', () => {
  it("refuses another team's project as not found", async () => {
    const other = await w.db.team.create({ data: { name: 'Elsewhere' } });
    const foreign = await w.db.project.create({ data: { teamId: other.id, name: 'Theirs', featureCount: 1, settings: '{}' } });
    await expect(runImport(w, foreign.id, 'id,label,a\nx,y,1\n')).rejects.toMatchObject({ status: 404 });
    expect(await w.db.sample.count({ where: { projectId: foreign.id } })).toBe(0);
  });
});

describe('a busy database', () => {
  it('answers 409 with nothing written when another writer holds the SQLite write lock', async () => {
    if (w.t.config.provider !== 'sqlite') return; // PostgreSQL has no database-wide write lock
    const { default: Database } = await import('better-sqlite3');
    const p = await newProject(w, { featureCount: 1 });
    const before = await projectState(w, p);
    const other = new Database(w.t.config.file);
    other.exec('BEGIN IMMEDIATE'); // another process's write transaction
    try {
      const r = await runImport(w, p, 'id,label,x\nlock1,a,1\n');
      if (r.ok) throw new Error('expected a refusal');
      expect([r.status, r.problems.map((x) => x.message)]).toEqual([
        409,
        ['The database is busy writing another change. Nothing was imported; try again in a moment.'],
      ]);
    } finally {
      other.exec('ROLLBACK');
      other.close();
    }
    expect(await projectState(w, p)).toEqual(before);
    const again = await runImport(w, p, 'id,label,x\nlock1,a,1\n');
    expect(again.ok).toBe(true);
  });
});

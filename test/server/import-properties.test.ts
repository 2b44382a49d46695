// Property tests (fast-check): generate a valid CSV or JSON Lines file, corrupt exactly one cell
// or row at a known position, import it in arbitrary chunk sizes, and check that the import is
// refused with exactly one problem naming that row and column, and that the database is the same
// as before (every row of every table, read with the raw driver; the import history and the
// audit log gain one "failed" entry by design and are compared apart).
// Also: every valid file imports, and what is stored equals what was generated.

import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { encodeFeatures } from '@/lib/server/features';
import { formatFloat32 } from '@/lib/server/import/numbers';
import { snapshot } from './db-harness';
import { newProject, openImportWorld, runImport, type ImportWorld } from './import-helpers';

let w: ImportWorld;
let project: string;
const D = 3;

beforeAll(async () => {
  w = await openImportWorld();
  project = await newProject(w, { featureCount: D });
  const seed = await runImport(w, project, 'id,label,text,f0,f1,f2\ne1,cat,,1,2,3\ne2,dog,"x, ""y""",4,5,6\n');
  if (!seed.ok) throw new Error('seed import failed');
});
afterAll(async () => {
  await w.close();
});

type Row = { id: string; label: string; text: string; features: number[] };

const textArb = fc.string({ unit: fc.constantFrom('a', 'b', ' ', ',', '"', '\n', 'é', '='), maxLength: 8 });
const valueArb = fc.double({ min: -1e6, max: 1e6, noNaN: true }).map((v) => Math.fround(v));
const rowsArb = fc
  .uniqueArray(
    fc.record({
      id: fc.stringMatching(/^[a-z0-9]{1,6}$/).map((s) => `n${s}`),
      label: fc.constantFrom('cat', 'dog', 'eel'),
      text: textArb,
      features: fc.array(valueArb, { minLength: D, maxLength: D }),
    }),
    { selector: (r) => r.id, minLength: 1, maxLength: 10 },
  )
  .map((rows) => rows as Row[]);

function csvCell(s: string): string {
  return /[",\n\r]/.test(s) || s === '' ? `"${s.replace(/"/g, '""')}"` : s;
}

function toCsv(rows: string[][]): string {
  return rows.map((r) => r.join(',')).join('\n') + '\n';
}

function csvCells(rows: Row[]): string[][] {
  return [
    ['id', 'label', 'text', 'f0', 'f1', 'f2'],
    ...rows.map((r) => [r.id, r.label, csvCell(r.text), ...r.features.map(formatFloat32)]),
  ];
}

async function dbState() {
  const s = await snapshot(w.t);
  const { ImportBatch, AuditEvent, ...rest } = s.data;
  return { schema: s.schema, data: rest, history: (ImportBatch ?? []).length + (AuditEvent ?? []).length };
}

const BAD_NUMBERS = ['abc', '', 'NaN', 'inf', '-Infinity', '1e40', '0x1A', '1.2.3', '--1', '1_000'];

describe('malformed CSV: the error names the corrupted row and column; nothing is written', () => {
  it('holds for one corrupted cell or row anywhere', async () => {
    await fc.assert(
      fc.asyncProperty(
        rowsArb,
        fc.constantFrom('number', 'duplicate-id', 'short-row', 'empty-label'),
        fc.nat(),
        fc.nat({ max: D - 1 }),
        fc.constantFrom(...BAD_NUMBERS),
        fc.integer({ min: 1, max: 64 }),
        async (rows, kind, pick, column, bad, chunk) => {
          fc.pre(kind !== 'duplicate-id' || rows.length >= 2);
          const cells = csvCells(rows);
          // Data row r is file row r + 2 (the header is row 1).
          const r = kind === 'duplicate-id' ? 1 + (pick % (rows.length - 1)) : pick % rows.length;
          const line = cells[r + 1];
          let expected: { row: number; column: string };
          if (kind === 'number') {
            line[3 + column] = bad;
            expected = { row: r + 2, column: `${4 + column} (f${column})` };
          } else if (kind === 'duplicate-id') {
            line[0] = rows[pick % r].id;
            expected = { row: r + 2, column: '1 (id)' };
          } else if (kind === 'short-row') {
            line.pop();
            expected = { row: r + 2, column: `${D + 3} (f${D - 1})` };
          } else {
            line[1] = '';
            expected = { row: r + 2, column: '2 (label)' };
          }
          const before = await dbState();
          const outcome = await runImport(w, project, toCsv(cells), { chunk });
          if (outcome.ok) return false;
          expect(outcome.problems.map((p) => ({ row: p.row, column: p.column }))).toEqual([expected]);
          const after = await dbState();
          expect(after.data).toEqual(before.data);
          expect(after.schema).toEqual(before.schema);
          expect(after.history).toBe(before.history + 2); // one failed ImportBatch, one audit event
          return true;
        },
      ),
      { numRuns: 30, seed: 5150 },
    );
  });
});

describe('malformed JSON Lines: the error names the corrupted line and field; nothing is written', () => {
  it('holds for one corrupted value or line anywhere', async () => {
    const BAD_JSON = ['"x"', 'null', 'true', 'NaN', '-Infinity', '[1]', '{}', '1e999'];
    await fc.assert(
      fc.asyncProperty(
        rowsArb,
        fc.constantFrom('value', 'duplicate-id', 'short-array', 'broken-line'),
        fc.nat(),
        fc.nat({ max: D - 1 }),
        fc.constantFrom(...BAD_JSON),
        fc.integer({ min: 1, max: 64 }),
        async (rows, kind, pick, column, bad, chunk) => {
          fc.pre(kind !== 'duplicate-id' || rows.length >= 2);
          const r = kind === 'duplicate-id' ? 1 + (pick % (rows.length - 1)) : pick % rows.length;
          const lines = rows.map((row, i) => {
            const id = kind === 'duplicate-id' && i === r ? rows[pick % r].id : row.id;
            const values = row.features.map(formatFloat32);
            if (kind === 'value' && i === r) values[column] = bad;
            if (kind === 'short-array' && i === r) values.pop();
            const text = `{"id":${JSON.stringify(id)},"label":${JSON.stringify(row.label)},"text":${JSON.stringify(row.text)},"features":[${values.join(',')}]}`;
            return kind === 'broken-line' && i === r ? text.slice(0, text.length - 2) : text;
          });
          // Line r is file row r + 1.
          const expectedColumn =
            kind === 'value' ? `features[${column}]` : kind === 'duplicate-id' ? 'id' : kind === 'short-array' ? 'features' : null;
          const before = await dbState();
          const outcome = await runImport(w, project, `${lines.join('\n')}\n`, { chunk, fileName: 'p.jsonl' });
          if (outcome.ok) return false;
          expect(outcome.problems.map((p) => ({ row: p.row, column: p.column }))).toEqual([{ row: r + 1, column: expectedColumn }]);
          const after = await dbState();
          expect(after.data).toEqual(before.data);
          expect(after.history).toBe(before.history + 2);
          return true;
        },
      ),
      { numRuns: 30, seed: 8086 },
    );
  });
});

describe('valid files', () => {
  it('import whole, in any chunking, and store exactly what was written', async () => {
    await fc.assert(
      fc.asyncProperty(rowsArb, fc.integer({ min: 1, max: 200 }), fc.boolean(), async (rows, chunk, asJsonl) => {
        const p = await newProject(w, { featureCount: D });
        const file = asJsonl
          ? rows // features written by hand: JSON.stringify would write -0 as 0
              .map((r) => `${JSON.stringify({ id: r.id, label: r.label, text: r.text }).slice(0, -1)},"features":[${r.features.map(formatFloat32).join(',')}]}`)
              .join('\n')
          : toCsv(csvCells(rows));
        const outcome = await runImport(w, p, file, { chunk, fileName: asJsonl ? 'v.jsonl' : 'v.csv' });
        if (!outcome.ok) throw new Error(JSON.stringify(outcome.problems));
        const stored = await w.db.sample.findMany({ where: { projectId: p }, orderBy: { externalId: 'asc' } });
        const sorted = [...rows].sort((a, b) => (a.id < b.id ? -1 : a.id > b.id ? 1 : 0));
        expect(stored.map((s) => [s.externalId, s.currentLabel, s.text, Buffer.from(s.features).toString('hex')])).toEqual(
          sorted.map((r) => [r.id, r.label, r.text === '' ? null : r.text, Buffer.from(encodeFeatures(r.features)).toString('hex')]),
        );
      }),
      { numRuns: 15, seed: 1234 },
    );
  });
});

import { afterAll, describe, expect, it } from 'vitest';
import { mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { InputFileError, readLabelledFile } from '@/lib/margin/io';

const dir = mkdtempSync(join(tmpdir(), 'borderline-io-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

let counter = 0;
function file(name: string, text: string): string {
  const p = join(dir, `${counter++}-${name}`);
  writeFileSync(p, text);
  return p;
}

/** Reads the file and returns the error message (the test fails if reading succeeds). */
async function errorOf(path: string): Promise<string> {
  try {
    await readLabelledFile(path);
  } catch (e) {
    expect(e).toBeInstanceOf(InputFileError);
    const msg = (e as Error).message;
    expect(msg.includes('\n')).toBe(false); // one line
    return msg;
  }
  throw new Error(`expected ${path} to be rejected`);
}

describe('reading CSV', () => {
  it('reads ids, labels and features in file order (CRLF, BOM, blank lines and quoted fields allowed)', async () => {
    const p = file('ok.csv', '\uFEFFid,label,x1,x2\r\n"s,1",cat,1.5,-2e-1\r\n\r\ns2,dog,3,.5\r\ns3,cat,+4,0\r\n');
    const d = await readLabelledFile(p);
    expect(d.ids).toEqual(['s,1', 's2', 's3']);
    expect(d.labels).toEqual(['cat', 'dog', 'cat']);
    expect(d.X.rows).toBe(3);
    expect(d.X.cols).toBe(2);
    expect(Array.from(d.X.data)).toEqual([1.5, -0.2, 3, 0.5, 4, 0]);
    expect(d.featureNames).toEqual(['x1', 'x2']);
  });

  it('detects JSON Lines by content when the extension says nothing', async () => {
    const p = file('data.txt', '{"id":"a","label":"p","features":[1,2]}\n{"id":"b","label":"q","features":[3,4]}\n');
    const d = await readLabelledFile(p);
    expect(d.ids).toEqual(['a', 'b']);
    expect(Array.from(d.X.data)).toEqual([1, 2, 3, 4]);
  });

  it('detects CSV by content when the extension says nothing', async () => {
    const p = file('data.dat', 'id,label,f\na,p,1\nb,q,2\n');
    expect((await readLabelledFile(p)).labels).toEqual(['p', 'q']);
  });

  const cases: [string, string, (p: string) => string][] = [
    ['ragged (short row)', 'id,label,a,b\ns1,x,1,2\ns2,y,3\n', (p) => `${p}: row 3, column 4 (b): expected 4 fields as in the header, found 3`],
    ['ragged (long row)', 'id,label,a,b\ns1,x,1,2\ns2,y,3,4,5\n', (p) => `${p}: row 3, column 5: expected 4 fields as in the header, found 5`],
    ['empty value', 'id,label,a,b\ns1,x,,2\ns2,y,3,4\n', (p) => `${p}: row 2, column 3 (a): empty value`],
    ['non-numeric', 'id,label,a,b\ns1,x,1,2\ns2,y,3,abc\n', (p) => `${p}: row 3, column 4 (b): "abc" is not a number`],
    ['hex is not accepted', 'id,label,a\ns1,x,0x10\ns2,y,1\n', (p) => `${p}: row 2, column 3 (a): "0x10" is not a number`],
    ['NaN', 'id,label,a,b\ns1,x,1,NaN\ns2,y,3,4\n', (p) => `${p}: row 2, column 4 (b): "NaN" is not a finite number`],
    ['infinity', 'id,label,a,b\ns1,x,1,2\ns2,y,-inf,4\n', (p) => `${p}: row 3, column 3 (a): "-inf" is not a finite number`],
    ['overflow', 'id,label,a\ns1,x,1e999\ns2,y,1\n', (p) => `${p}: row 2, column 3 (a): "1e999" is not a finite number`],
    ['duplicate id', 'id,label,a\ns1,x,1\ns2,y,2\ns1,y,3\n', (p) => `${p}: row 4, column 1 (id): duplicate id "s1" (first on row 2)`],
    ['empty id', 'id,label,a\ns1,x,1\n,y,2\n', (p) => `${p}: row 3, column 1 (id): empty id`],
    ['empty label', 'id,label,a\ns1,,1\ns2,y,2\n', (p) => `${p}: row 2, column 2 (label): empty label`],
    ['one class only', 'id,label,a\ns1,x,1\ns2,x,2\ns3,x,3\n', (p) => `${p}: column 2 (label): only one class ("x") among 3 samples; at least two classes are needed`],
    ['wrong header', 'name,label,a\ns1,x,1\n', (p) => `${p}: row 1: header must start with "id,label", found "name,label"`],
    ['no feature columns', 'id,label\ns1,x\n', (p) => `${p}: row 1, column 3: no feature columns after "id,label"`],
    ['empty file', '', (p) => `${p}: row 1: empty file; expected a header "id,label,<features>"`],
    ['header only', 'id,label,a\n', (p) => `${p}: row 2: no samples after the header`],
    ['unclosed quote', 'id,label,a\ns1,x,1\ns2,y,"2\n', (p) => `${p}: row 3: malformed CSV (unclosed quote)`],
  ];
  for (const [name, text, expected] of cases) {
    it(`rejects: ${name}`, async () => {
      const p = file('bad.csv', text);
      expect(await errorOf(p)).toBe(expected(p));
    });
  }
});

describe('reading JSON Lines', () => {
  it('reads .jsonl and .ndjson, numeric ids and labels become strings', async () => {
    const text = '{"id":1,"label":0,"features":[0.5,1]}\n\n{"id":"two","label":"1","features":[2,3],"extra":true}\n';
    for (const ext of ['jsonl', 'ndjson']) {
      const d = await readLabelledFile(file(`ok.${ext}`, text));
      expect(d.ids).toEqual(['1', 'two']);
      expect(d.labels).toEqual(['0', '1']);
      expect(Array.from(d.X.data)).toEqual([0.5, 1, 2, 3]);
    }
  });

  const cases: [string, string, (p: string) => string][] = [
    ['wrong feature count', '{"id":"a","label":"x","features":[1,2]}\n{"id":"b","label":"y","features":[1,2]}\n{"id":"c","label":"y","features":[1,2,3]}\n', (p) => `${p}: row 3, column features: expected 2 features as on row 1, found 3`],
    ['invalid JSON', '{"id":"a","label":"x","features":[1]}\n{"id":"b",\n', (p) => `${p}: row 2: not valid JSON`],
    ['null feature', '{"id":"a","label":"x","features":[1,null]}\n{"id":"b","label":"y","features":[1,2]}\n', (p) => `${p}: row 1, column features[1]: null is not a number`],
    ['NaN as a string', '{"id":"a","label":"x","features":["NaN"]}\n{"id":"b","label":"y","features":[1]}\n', (p) => `${p}: row 1, column features[0]: "NaN" is not a finite number`],
    ['overflow', '{"id":"a","label":"x","features":[1e999]}\n{"id":"b","label":"y","features":[1]}\n', (p) => `${p}: row 1, column features[0]: number out of range (not finite)`],
    ['missing label', '{"id":"a","features":[1]}\n', (p) => `${p}: row 1, column label: missing label`],
    ['features not an array', '{"id":"a","label":"x","features":"1,2"}\n', (p) => `${p}: row 1, column features: features must be an array of numbers`],
    ['not an object', '[1,2,3]\n', (p) => `${p}: row 1: expected a JSON object {"id","label","features"}`],
    ['duplicate id', '{"id":"a","label":"x","features":[1]}\n{"id":"a","label":"y","features":[2]}\n', (p) => `${p}: row 2, column id: duplicate id "a" (first on row 1)`],
    ['one class only', '{"id":"a","label":"x","features":[1]}\n{"id":"b","label":"x","features":[2]}\n', (p) => `${p}: column label: only one class ("x") among 2 samples; at least two classes are needed`],
    ['empty file', '\n\n', (p) => `${p}: no samples (empty file)`],
  ];
  for (const [name, text, expected] of cases) {
    it(`rejects: ${name}`, async () => {
      const p = file('bad.jsonl', text);
      expect(await errorOf(p)).toBe(expected(p));
    });
  }
});

describe('unreadable files', () => {
  it('names a missing file', async () => {
    const p = join(dir, 'missing.csv');
    expect(await errorOf(p)).toBe(`${p}: cannot read file (no such file)`);
  });
  it('names a directory', async () => {
    const p = join(dir, 'a-directory.csv');
    mkdirSync(p);
    expect(await errorOf(p)).toBe(`${p}: cannot read file (is a directory)`);
  });
  it('uses the display name when given', async () => {
    await expect(readLabelledFile(join(dir, 'nope.csv'), { display: 'nope.csv' })).rejects.toThrow('nope.csv: cannot read file (no such file)');
  });
});

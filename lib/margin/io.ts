/**
 * Reading labelled samples from a file, for the command line and scripts.
 *
 * Formats:
 * - CSV with a header `id,label,<feature columns>` (parsed with csv-parse, streamed);
 * - JSON Lines, one object per line: `{"id": "...", "label": "...", "features": [numbers]}`.
 * The format is chosen by extension (.csv; .jsonl / .ndjson) or, for any other name, by content
 * (first non-blank character `{` means JSON Lines).
 *
 * Every problem is reported as an `InputFileError` whose message is one line naming the file, the
 * row (1-based line number in the file; the CSV header is row 1) and the column (1-based CSV column
 * with its header name, or the JSON field), e.g.
 *   `data.csv: row 7, column 4 (radius): "abc" is not a number`.
 */
import { createReadStream } from 'node:fs';
import { open } from 'node:fs/promises';
import { createInterface } from 'node:readline';
import { parse, CsvError } from 'csv-parse';
import type { LabelledData } from './types';

export type InputFormat = 'csv' | 'jsonl';

export class InputFileError extends Error {
  readonly file: string;
  readonly row: number | null;
  readonly column: string | null;
  readonly detail: string;
  /**
   * @param column  CSV: `"4 (radius)"`-style text or a bare column number; JSON Lines: the field name.
   */
  constructor(file: string, row: number | null, column: number | string | null, detail: string) {
    const col = column === null ? null : String(column);
    const where = [row !== null ? `row ${row}` : null, col !== null ? `column ${col}` : null].filter(Boolean).join(', ');
    super(`${file}: ${where ? `${where}: ` : ''}${detail}`);
    this.name = 'InputFileError';
    this.file = file;
    this.row = row;
    this.column = col;
    this.detail = detail;
  }
}

const NUMBER_RE = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const NON_FINITE_RE = /^[+-]?(?:nan|inf|infinity)$/i;

/** Parses one numeric cell; returns the number or an error text. */
function parseNumber(text: string): number | string {
  const s = text.trim();
  if (s === '') return 'empty value';
  if (NON_FINITE_RE.test(s)) return `"${s}" is not a finite number`;
  if (!NUMBER_RE.test(s)) return `"${s}" is not a number`;
  const v = Number(s);
  if (!Number.isFinite(v)) return `"${s}" is not a finite number`;
  return v;
}

class Growable {
  private buf: Float64Array;
  length = 0;
  constructor(initial: number) {
    this.buf = new Float64Array(Math.max(16, initial));
  }
  push(v: number): void {
    if (this.length === this.buf.length) {
      const next = new Float64Array(this.buf.length * 2);
      next.set(this.buf);
      this.buf = next;
    }
    this.buf[this.length++] = v;
  }
  finish(): Float64Array {
    return this.buf.slice(0, this.length);
  }
}

function errnoText(e: unknown): string {
  if (e && typeof e === 'object' && 'code' in e) {
    const code = String((e as { code: unknown }).code);
    const known: Record<string, string> = {
      ENOENT: 'no such file',
      EACCES: 'permission denied',
      EISDIR: 'is a directory',
      EMFILE: 'too many open files',
    };
    return `cannot read file (${known[code] ?? code})`;
  }
  return `cannot read file (${e instanceof Error ? e.message : String(e)})`;
}

/** Decides the format from the extension, or from the first non-blank character. */
export async function detectFormat(path: string, display = path): Promise<InputFormat> {
  const lower = path.toLowerCase();
  if (lower.endsWith('.csv')) return 'csv';
  if (lower.endsWith('.jsonl') || lower.endsWith('.ndjson')) return 'jsonl';
  let head = '';
  try {
    const fh = await open(path, 'r');
    try {
      const buf = Buffer.alloc(4096);
      const { bytesRead } = await fh.read(buf, 0, buf.length, 0);
      head = buf.subarray(0, bytesRead).toString('utf8');
    } finally {
      await fh.close();
    }
  } catch (e) {
    throw new InputFileError(display, null, null, errnoText(e));
  }
  return head.replace(/^\uFEFF/, '').trimStart().startsWith('{') ? 'jsonl' : 'csv';
}

/**
 * Reads and validates a labelled-sample file.
 * @param display  name used in error messages (defaults to the path as given).
 */
export async function readLabelledFile(path: string, options: { format?: InputFormat; display?: string } = {}): Promise<LabelledData> {
  const display = options.display ?? path;
  // Open once up front so an unreadable file gives one clear error before any parsing.
  try {
    const fh = await open(path, 'r');
    const st = await fh.stat();
    await fh.close();
    if (st.isDirectory()) throw Object.assign(new Error('directory'), { code: 'EISDIR' });
  } catch (e) {
    throw new InputFileError(display, null, null, errnoText(e));
  }
  const format = options.format ?? (await detectFormat(path, display));
  const data = format === 'csv' ? await readCsv(path, display) : await readJsonl(path, display);
  checkLabels(data, display, format);
  return data;
}

interface RowSink {
  ids: string[];
  labels: string[];
  values: Growable;
  idRow: Map<string, number>;
}

function addSample(sink: RowSink, display: string, row: number, idColumn: string, labelColumn: string, id: string, label: string): void {
  if (id === '') throw new InputFileError(display, row, idColumn, 'empty id');
  if (label === '') throw new InputFileError(display, row, labelColumn, 'empty label');
  const first = sink.idRow.get(id);
  if (first !== undefined) throw new InputFileError(display, row, idColumn, `duplicate id "${id}" (first on row ${first})`);
  sink.idRow.set(id, row);
  sink.ids.push(id);
  sink.labels.push(label);
}

function checkLabels(data: LabelledData, display: string, format: InputFormat): void {
  const labelColumn = format === 'csv' ? '2 (label)' : 'label';
  const classes = new Set(data.labels);
  if (classes.size < 2) {
    const only = data.labels[0];
    throw new InputFileError(
      display,
      null,
      labelColumn,
      `only one class ("${only}") among ${data.labels.length} sample${data.labels.length === 1 ? '' : 's'}; at least two classes are needed`,
    );
  }
}

async function readCsv(path: string, display: string): Promise<LabelledData> {
  const parser = createReadStream(path).pipe(
    parse({ bom: true, relax_column_count: true, skip_empty_lines: true, info: true }),
  );
  let header: string[] | null = null;
  let d = 0;
  const sink: RowSink = { ids: [], labels: [], values: new Growable(1 << 16), idRow: new Map() };
  const colName = (j: number) => `${j + 1} (${(header as string[])[j]})`;
  try {
    for await (const item of parser as AsyncIterable<{ record: string[]; info: { lines: number } }>) {
      const { record, info } = item;
      const row = info.lines;
      if (header === null) {
        header = record.map((h) => h.trim());
        if (header.length < 2 || header[0].toLowerCase() !== 'id' || header[1].toLowerCase() !== 'label') {
          throw new InputFileError(display, row, null, `header must start with "id,label", found "${record.slice(0, 2).join(',')}"`);
        }
        d = header.length - 2;
        if (d === 0) throw new InputFileError(display, row, 3, 'no feature columns after "id,label"');
        continue;
      }
      if (record.length !== header.length) {
        const column = Math.min(record.length, header.length) + 1;
        throw new InputFileError(
          display,
          row,
          column <= header.length ? colName(column - 1) : column,
          `expected ${header.length} fields as in the header, found ${record.length}`,
        );
      }
      addSample(sink, display, row, colName(0), colName(1), record[0].trim(), record[1].trim());
      for (let j = 2; j < record.length; j++) {
        const v = parseNumber(record[j]);
        if (typeof v === 'string') throw new InputFileError(display, row, colName(j), v);
        sink.values.push(v);
      }
    }
  } catch (e) {
    if (e instanceof InputFileError) throw e;
    if (e instanceof CsvError) {
      const lines = typeof e.lines === 'number' ? e.lines : null;
      const what: Record<string, string> = {
        CSV_QUOTE_NOT_CLOSED: 'unclosed quote',
        INVALID_OPENING_QUOTE: 'quote inside an unquoted field',
        CSV_INVALID_CLOSING_QUOTE: 'characters after a closing quote',
      };
      throw new InputFileError(display, lines, null, `malformed CSV (${what[e.code] ?? e.message})`);
    }
    throw new InputFileError(display, null, null, errnoText(e));
  }
  if (header === null) throw new InputFileError(display, 1, null, 'empty file; expected a header "id,label,<features>"');
  if (sink.ids.length === 0) throw new InputFileError(display, 2, null, 'no samples after the header');
  return {
    ids: sink.ids,
    labels: sink.labels,
    X: { data: sink.values.finish(), rows: sink.ids.length, cols: d },
    featureNames: header.slice(2),
  };
}

function scalarText(v: unknown): string | null {
  if (typeof v === 'string') return v.trim();
  if (typeof v === 'number' && Number.isFinite(v)) return String(v);
  return null;
}

async function readJsonl(path: string, display: string): Promise<LabelledData> {
  const lines = createInterface({ input: createReadStream(path, { encoding: 'utf8' }), crlfDelay: Infinity });
  const sink: RowSink = { ids: [], labels: [], values: new Growable(1 << 16), idRow: new Map() };
  let d = -1;
  let firstRow = 0;
  let row = 0;
  try {
    for await (const raw of lines) {
      row++;
      const line = row === 1 ? raw.replace(/^\uFEFF/, '') : raw;
      if (line.trim() === '') continue;
      let obj: unknown;
      try {
        obj = JSON.parse(line);
      } catch {
        throw new InputFileError(display, row, null, 'not valid JSON');
      }
      if (obj === null || typeof obj !== 'object' || Array.isArray(obj)) {
        throw new InputFileError(display, row, null, 'expected a JSON object {"id","label","features"}');
      }
      const rec = obj as Record<string, unknown>;
      const id = scalarText(rec.id);
      if (id === null) throw new InputFileError(display, row, 'id', rec.id === undefined ? 'missing id' : 'id must be a string or a number');
      const label = scalarText(rec.label);
      if (label === null) {
        throw new InputFileError(display, row, 'label', rec.label === undefined ? 'missing label' : 'label must be a string or a number');
      }
      const features = rec.features;
      if (!Array.isArray(features)) {
        throw new InputFileError(display, row, 'features', features === undefined ? 'missing features' : 'features must be an array of numbers');
      }
      if (d < 0) {
        if (features.length === 0) throw new InputFileError(display, row, 'features', 'empty features array');
        d = features.length;
        firstRow = row;
      } else if (features.length !== d) {
        throw new InputFileError(display, row, 'features', `expected ${d} features as on row ${firstRow}, found ${features.length}`);
      }
      addSample(sink, display, row, 'id', 'label', id, label);
      for (let j = 0; j < features.length; j++) {
        const v = features[j];
        if (typeof v === 'number') {
          // JSON.parse turns an overflowing literal such as 1e999 into Infinity.
          if (!Number.isFinite(v)) throw new InputFileError(display, row, `features[${j}]`, 'number out of range (not finite)');
          sink.values.push(v);
        } else {
          const parsed = typeof v === 'string' ? parseNumber(v) : `${JSON.stringify(v)} is not a number`;
          if (typeof parsed === 'string') throw new InputFileError(display, row, `features[${j}]`, parsed);
          sink.values.push(parsed);
        }
      }
    }
  } catch (e) {
    if (e instanceof InputFileError) throw e;
    throw new InputFileError(display, null, null, errnoText(e));
  }
  if (sink.ids.length === 0) throw new InputFileError(display, null, null, 'no samples (empty file)');
  const featureNames = Array.from({ length: d }, (_, j) => `f${j + 1}`);
  return { ids: sink.ids, labels: sink.labels, X: { data: sink.values.finish(), rows: sink.ids.length, cols: d }, featureNames };
}

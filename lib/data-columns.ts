/**
 * How an import file's columns map to a sample, shared by the server import and the Data
 * screen's preview (pure: no Node or browser APIs).
 *
 * Column names (compared case-insensitively, surrounding spaces ignored):
 * - `id`      the sample's stable external id (required)
 * - `label`   its class (required)
 * - `text`    optional text shown to reviewers
 * - `image`   optional image: an http(s) URL, or the name of a file uploaded with the import
 * - `meta.<name>`  metadata fields, kept as a JSON object
 * - `features` (CSV: a cell holding a JSON array of numbers)
 * - provenance columns that an export adds (`original_label`, `label_revision`,
 *   `added_revision`, `votes`, `decided_by`) are ignored, so an export can be imported again
 * - every other column is a feature, in file order, unless a feature prefix is chosen: then
 *   only columns whose name starts with the prefix are features and the rest are ignored.
 *
 * CSV cells that a spreadsheet would run as a formula are neutralised on export by a leading
 * apostrophe (OWASP "CSV Injection"); `unneutraliseCell` undoes exactly that on import, so
 * export → import returns the original text.
 */

export const RESERVED_COLUMNS = ['id', 'label', 'text', 'image', 'features'] as const;
export const PROVENANCE_COLUMNS = ['original_label', 'label_revision', 'added_revision', 'votes', 'decided_by'] as const;
export const META_PREFIX = 'meta.';

export type ColumnRole = 'id' | 'label' | 'text' | 'image' | 'meta' | 'feature' | 'features-array' | 'ignored';

export interface ColumnInfo {
  /** 0-based position in the header. */
  index: number;
  /** Header text as written (trimmed). */
  name: string;
  role: ColumnRole;
  /** For `meta` columns: the key after `meta.`. */
  metaKey?: string;
}

export interface HeaderProblem {
  /** 0-based column index, or null for the header as a whole. */
  index: number | null;
  /** The sentence after the location, e.g. `no "id" column.` */
  detail: string;
}

export interface HeaderAnalysis {
  columns: ColumnInfo[];
  idIndex: number;
  labelIndex: number;
  textIndex: number;
  imageIndex: number;
  featuresArrayIndex: number;
  /** 0-based indices of the feature columns, in file order. */
  featureIndices: number[];
  metaColumns: { index: number; key: string }[];
  problems: HeaderProblem[];
}

export interface MappingOptions {
  /** When set (non-empty), only columns starting with this text are features. */
  featurePrefix?: string;
}

const FORMULA_TRIGGER = /^'*[=+\-@\t\r]/;
const NEUTRALISED = /^'+[=+\-@\t\r]/;

/**
 * OWASP CSV Injection: a cell whose text starts with = + - @ tab or carriage return is prefixed
 * with an apostrophe so a spreadsheet shows it as text. Cells that already start with
 * apostrophes followed by such a character get one more, which keeps the mapping reversible.
 */
export function neutraliseCell(value: string): string {
  return FORMULA_TRIGGER.test(value) ? `'${value}` : value;
}

/** The inverse of `neutraliseCell`. */
export function unneutraliseCell(value: string): string {
  return NEUTRALISED.test(value) ? value.slice(1) : value;
}

/** Quotes one CSV cell (RFC 4180): always quoted, inner quotes doubled. */
export function quoteCsvCell(value: string): string {
  return `"${value.replace(/"/g, '""')}"`;
}

/** A text cell for an exported CSV: neutralised, then quoted. */
export function csvTextCell(value: string): string {
  return quoteCsvCell(neutraliseCell(value));
}

function normalise(name: string): string {
  return name.trim().toLowerCase();
}

/** Column letter-free description used in messages: `4 (f2)` (1-based number and name). */
export function describeColumn(index: number, name: string): string {
  return name === '' ? `${index + 1}` : `${index + 1} (${name})`;
}

/** Classifies the columns of a CSV header. Pure; used by the preview and the server import. */
export function analyseHeader(header: readonly string[], options: MappingOptions = {}): HeaderAnalysis {
  const prefix = options.featurePrefix?.trim() ?? '';
  const columns: ColumnInfo[] = [];
  const problems: HeaderProblem[] = [];
  const seen = new Map<string, number>();
  let idIndex = -1;
  let labelIndex = -1;
  let textIndex = -1;
  let imageIndex = -1;
  let featuresArrayIndex = -1;
  const featureIndices: number[] = [];
  const metaColumns: { index: number; key: string }[] = [];

  header.forEach((raw, index) => {
    const name = raw.trim();
    const key = normalise(raw);
    const previous = seen.get(key);
    if (name === '') {
      problems.push({ index, detail: 'the column has no name; name it or remove it.' });
      columns.push({ index, name, role: 'ignored' });
      return;
    }
    if (previous !== undefined) {
      problems.push({ index, detail: `duplicate column name "${name}" (also column ${previous + 1}).` });
      columns.push({ index, name, role: 'ignored' });
      return;
    }
    seen.set(key, index);
    let role: ColumnRole;
    let metaKey: string | undefined;
    if (key === 'id') {
      role = 'id';
      idIndex = index;
    } else if (key === 'label') {
      role = 'label';
      labelIndex = index;
    } else if (key === 'text') {
      role = 'text';
      textIndex = index;
    } else if (key === 'image') {
      role = 'image';
      imageIndex = index;
    } else if (key === 'features') {
      role = 'features-array';
      featuresArrayIndex = index;
    } else if (key.startsWith(META_PREFIX)) {
      metaKey = name.slice(META_PREFIX.length).trim();
      if (metaKey === '') {
        problems.push({ index, detail: 'a meta. column needs a name after "meta.".' });
        role = 'ignored';
      } else {
        role = 'meta';
        metaColumns.push({ index, key: metaKey });
      }
    } else if ((PROVENANCE_COLUMNS as readonly string[]).includes(key)) {
      role = 'ignored';
    } else if (prefix !== '') {
      role = name.startsWith(prefix) ? 'feature' : 'ignored';
    } else {
      role = 'feature';
    }
    if (role === 'feature') featureIndices.push(index);
    columns.push(metaKey === undefined ? { index, name, role } : { index, name, role, metaKey });
  });

  if (idIndex < 0) problems.push({ index: null, detail: 'no "id" column; the header must name one column id.' });
  if (labelIndex < 0) problems.push({ index: null, detail: 'no "label" column; the header must name one column label.' });
  if (featuresArrayIndex >= 0 && featureIndices.length > 0) {
    // A features array and feature columns at once would be ambiguous.
    for (const i of featureIndices) columns[i] = { ...columns[i], role: 'ignored' };
    featureIndices.length = 0;
  }
  if (featuresArrayIndex < 0 && featureIndices.length === 0) {
    problems.push({
      index: null,
      detail:
        prefix !== ''
          ? `no feature columns: no column name starts with "${prefix}".`
          : 'no feature columns: add one column per feature, or a "features" column holding a JSON array.',
    });
  }
  return {
    columns,
    idIndex,
    labelIndex,
    textIndex,
    imageIndex,
    featuresArrayIndex,
    featureIndices,
    metaColumns,
    problems,
  };
}

/** True for an http or https URL (the only remote image references accepted). */
export function isImageUrl(value: string): boolean {
  if (!/^https?:\/\//i.test(value)) return false;
  try {
    const u = new URL(value);
    return (u.protocol === 'http:' || u.protocol === 'https:') && u.hostname !== '';
  } catch {
    return false;
  }
}

/** Prefix of Sample.imageRef for images uploaded with an import. */
export const UPLOAD_REF_PREFIX = 'upload:';

/**
 * Where the browser loads a sample's image from: the URL itself, or the app's image route for
 * an uploaded file (`upload:<batch>/<file>`).
 */
export function imageSrc(projectId: string, imageRef: string | null): string | null {
  if (imageRef === null || imageRef === '') return null;
  if (imageRef.startsWith(UPLOAD_REF_PREFIX)) {
    const rest = imageRef.slice(UPLOAD_REF_PREFIX.length);
    return `/api/projects/${encodeURIComponent(projectId)}/images/${rest.split('/').map(encodeURIComponent).join('/')}`;
  }
  return isImageUrl(imageRef) ? imageRef : null;
}

// ───────────────────────── preview (first few KB, in the browser) ─────────────────────────

export type PreviewFormat = 'csv' | 'jsonl';

export interface PreviewResult {
  format: PreviewFormat | null;
  /** For CSV: the header; for JSON Lines: the keys of the first object. */
  header: string[];
  /** The first rows as cell texts (CSV) or field texts (JSON Lines, in `header` order). */
  rows: string[][];
  /** Column roles for CSV; for JSON Lines, the fields found. */
  analysis: HeaderAnalysis | null;
  /** A problem that stops the preview (not UTF-8 text, not CSV or JSON Lines, …). */
  problem: string | null;
}

/**
 * Splits CSV text (RFC 4180: comma, double quotes, "" inside quotes) into records. Stops at the
 * last complete line when `complete` is false (the text is a cut-off head of the file).
 */
export function splitCsvRecords(text: string, complete: boolean, maxRecords: number): string[][] {
  const records: string[][] = [];
  let field = '';
  let record: string[] = [];
  let quoted = false;
  let i = 0;
  const n = text.length;
  while (i < n && records.length < maxRecords) {
    const c = text[i];
    if (quoted) {
      if (c === '"') {
        if (text[i + 1] === '"') {
          field += '"';
          i += 2;
          continue;
        }
        quoted = false;
        i++;
        continue;
      }
      field += c;
      i++;
      continue;
    }
    if (c === '"' && field === '') {
      quoted = true;
      i++;
    } else if (c === ',') {
      record.push(field);
      field = '';
      i++;
    } else if (c === '\n' || c === '\r') {
      record.push(field);
      field = '';
      if (!(record.length === 1 && record[0] === '')) records.push(record);
      record = [];
      i += c === '\r' && text[i + 1] === '\n' ? 2 : 1;
    } else {
      field += c;
      i++;
    }
  }
  if (complete && records.length < maxRecords && (field !== '' || record.length > 0)) {
    record.push(field);
    records.push(record);
  }
  return records;
}

function previewCell(value: unknown): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'string') return value;
  if (Array.isArray(value)) {
    const head = value.slice(0, 4).map((v) => String(v)).join(', ');
    return `[${head}${value.length > 4 ? `, … ${value.length} values` : ''}]`;
  }
  if (typeof value === 'object') return JSON.stringify(value);
  return String(value);
}

/**
 * Reads the head of a file as the Data screen's preview. `bytes` is the first few KB;
 * `complete` says whether that is the whole file.
 */
export function previewHead(bytes: Uint8Array, complete: boolean, options: MappingOptions = {}, maxRows = 8): PreviewResult {
  const empty: PreviewResult = { format: null, header: [], rows: [], analysis: null, problem: null };
  const binary = sniffBinary(bytes);
  if (binary !== null) return { ...empty, problem: binary };
  let text: string;
  try {
    // A cut-off head may end inside a multi-byte character: decode without the last 3 bytes.
    const usable = complete ? bytes : bytes.subarray(0, Math.max(0, bytes.length - 3));
    text = new TextDecoder('utf-8', { fatal: true }).decode(usable);
  } catch {
    return { ...empty, problem: 'The file is not UTF-8 text. Save it as UTF-8 (CSV UTF-8 in most spreadsheets) and try again.' };
  }
  const start = text.replace(/^\uFEFF/, '').trimStart();
  if (start === '') return { ...empty, problem: 'The file is empty.' };
  if (start.startsWith('[')) {
    return { ...empty, problem: 'The file is a JSON array, not JSON Lines: write one JSON object per line.' };
  }
  if (start.startsWith('{')) {
    const lines = start.split(/\r?\n/);
    if (!complete) lines.pop();
    const objects: Record<string, unknown>[] = [];
    for (const line of lines) {
      if (line.trim() === '') continue;
      try {
        const parsed: unknown = JSON.parse(line);
        if (parsed && typeof parsed === 'object' && !Array.isArray(parsed)) objects.push(parsed as Record<string, unknown>);
      } catch {
        break;
      }
      if (objects.length >= maxRows) break;
    }
    const header: string[] = [];
    for (const o of objects) for (const k of Object.keys(o)) if (!header.includes(k)) header.push(k);
    const rows = objects.map((o) => header.map((k) => previewCell(o[k])));
    return { format: 'jsonl', header, rows, analysis: null, problem: objects.length === 0 ? 'No complete JSON object in the first lines.' : null };
  }
  const records = splitCsvRecords(start, complete, maxRows + 1);
  if (records.length === 0) return { ...empty, format: 'csv', problem: 'No complete line in the start of the file.' };
  const header = records[0].map((h) => h.trim());
  if (header.length < 2) {
    return {
      ...empty,
      format: 'csv',
      header,
      problem: 'The first line has no commas: the file is neither comma-separated CSV nor JSON Lines.',
    };
  }
  return { format: 'csv', header, rows: records.slice(1), analysis: analyseHeader(header, options), problem: null };
}

/**
 * Recognises files that are certainly not text: common binary signatures, UTF-16, NUL bytes.
 * Returns the message to show, or null.
 */
export function sniffBinary(bytes: Uint8Array): string | null {
  const b = bytes;
  const starts = (...sig: number[]) => sig.every((v, i) => b[i] === v);
  const neither = 'The file is neither CSV nor JSON Lines';
  if (b.length >= 4 && starts(0x50, 0x4b, 0x03, 0x04)) {
    return `${neither}: it is a ZIP archive (a spreadsheet workbook such as .xlsx is one). Save the sheet as CSV.`;
  }
  if (b.length >= 2 && starts(0x1f, 0x8b)) return `${neither}: it is gzip-compressed. Decompress it first.`;
  if (b.length >= 4 && starts(0x25, 0x50, 0x44, 0x46)) return `${neither}: it is a PDF document.`;
  if (b.length >= 2 && (starts(0xff, 0xfe) || starts(0xfe, 0xff))) {
    return 'The file is UTF-16 text. Save it as UTF-8 (CSV UTF-8 in most spreadsheets) and try again.';
  }
  const limit = Math.min(b.length, 8192);
  for (let i = 0; i < limit; i++) {
    if (b[i] === 0) return `${neither}: it contains binary data (a NUL byte at byte ${i + 1}).`;
  }
  return null;
}

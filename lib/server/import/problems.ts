/**
 * Problems found while reading an import file, with their exact wording.
 *
 * Every problem names where it is: `Row <n>` (CSV: records counted as a spreadsheet numbers
 * them, the header is row 1; JSON Lines: the line number) and the column (CSV: 1-based number
 * and header name, e.g. `column 4 (f2)`; JSON Lines: the field, e.g. `field features[3]`).
 * Problems about the file as a whole have neither.
 */

export interface ImportProblem {
  /** 1-based row (see above), or null for the file as a whole. */
  row: number | null;
  /** CSV: `4 (f2)`; JSON Lines: `features[3]`; null when the problem is about a whole row. */
  column: string | null;
  /** The full sentence shown to the user, location included. */
  message: string;
}

/** Default cap on the number of problems collected before the import stops reading. */
export const MAX_PROBLEMS = 20;

/** `line` is for problems found before rows exist (encoding): `Line <n>: …`. */
export type Where = { row: number | null; column: string | null; kind: 'csv' | 'jsonl' | 'line' };

function location(w: Where): string {
  if (w.row === null) return '';
  if (w.kind === 'line') return `Line ${w.row}: `;
  const col = w.column === null ? '' : w.kind === 'csv' ? `, column ${w.column}` : `, field ${w.column}`;
  return `Row ${w.row}${col}: `;
}

/** Builds a problem: the location prefix followed by `detail` (a sentence ending with a period). */
export function problemAt(w: Where, detail: string): ImportProblem {
  const text = location(w) + detail;
  return { row: w.row, column: w.column, message: w.row === null ? capitalise(text) : text };
}

function capitalise(s: string): string {
  return s.length === 0 ? s : s[0].toUpperCase() + s.slice(1);
}

/** Shows a cell's text inside a message: quoted, control characters escaped, at most 40 characters. */
export function shown(value: string): string {
  const escaped = value.replace(/[\u0000-\u001f\u007f]/g, (c) => `\\u${c.charCodeAt(0).toString(16).padStart(4, '0')}`);
  const cut = escaped.length > 40 ? `${escaped.slice(0, 39)}…` : escaped;
  return `"${cut}"`;
}

/** The sentences used after the location. Tests compare against these texts written out. */
export const DETAIL = {
  emptyNumber: 'empty value; a number is required.',
  notNumber: (v: string) => `${shown(v)} is not a number.`,
  notFinite: (v: string) => `${shown(v)} is not a finite number.`,
  outOfRange: (v: string) => `${shown(v)} is outside the range of 32-bit floats.`,
  jsonNotNumber: (json: string) => `${json} is not a number.`,
  emptyId: 'empty id.',
  emptyLabel: 'empty label.',
  tooLong: (what: string, max: number) => `${what} is longer than ${max} characters.`,
  controlChars: (what: string) => `${what} contains control characters.`,
  duplicateId: (id: string, firstRow: number) => `duplicate id ${shown(id)} (first on row ${firstRow}).`,
  idExists: (id: string) => `id ${shown(id)} already exists in this project; import in update mode to change it.`,
  tooManyClasses: (label: string, n: number, max: number) =>
    `${shown(label)} would be class ${n}; this project allows at most ${max} classes.`,
  raggedShort: (have: number, header: number) => `missing value: the row has ${have} columns, the header has ${header}.`,
  raggedLong: (have: number, header: number) => `extra value: the row has ${have} columns, the header has ${header}.`,
  featureCountHeader: (found: number, expected: number) =>
    `the file has ${found} feature column${found === 1 ? '' : 's'}; the project expects ${expected}.`,
  featureCountRow: (found: number, expected: number) =>
    `has ${found} value${found === 1 ? '' : 's'}; the project expects ${expected} features.`,
  featureArrayNotArray: 'must be a JSON array of numbers.',
  notUtf8: (byte: number, offset: number) =>
    `the file is not UTF-8 text (byte 0x${byte.toString(16).toUpperCase().padStart(2, '0')} at offset ${offset}). Save it as UTF-8 and try again.`,
  notUtf8AtEnd: (offset: number) => `the file is not UTF-8 text (it ends inside a character at offset ${offset}). Save it as UTF-8 and try again.`,
  notJson: 'not valid JSON; each line must be one JSON object.',
  notObject: 'not a JSON object; each line must be one JSON object.',
  jsonNonFinite: (token: string) => `${token} is not a finite number (JSON has no NaN or Infinity).`,
  missingField: (field: string) => `missing "${field}".`,
  wrongType: (expected: string) => `must be ${expected}.`,
  unknownField: (field: string) =>
    `unknown field "${field}"; expected id, label, features, text, image, meta or meta.<name>.`,
  noFeatures: 'no "features" array; give the features as an array, or choose a feature prefix for flat fields.',
  metaValue: 'must be a string, number, true, false or null.',
  badImage: (v: string) =>
    `${shown(v)} is neither an http(s) URL nor the name of an image uploaded with this import.`,
  csvQuoteNotClosed: 'a quoted field is not closed before the end of the file.',
  csvBadQuote: 'a quote inside a field must be doubled ("") and the field enclosed in quotes.',
  csvRecordTooLarge: (max: number) => `the row is longer than ${max} characters; check for an unclosed quote.`,
  csvMalformed: (code: string) => `malformed CSV (${code}).`,
  lineTooLong: (max: number) => `the line is longer than ${max} characters.`,
  noRows: 'the file has no data rows.',
  emptyFile: 'the file is empty.',
  jsonArrayFile: 'the file is a JSON array, not JSON Lines: write one JSON object per line.',
  headerNoCommas: 'the first line has no commas: the file is neither comma-separated CSV nor JSON Lines.',
  moreProblems: (shownCount: number) => `Stopped after the first ${shownCount} problems; fix these and try again.`,
} as const;

/** Thrown by the reader for a problem that stops reading at once (encoding, structure). */
export class FatalImportProblem extends Error {
  readonly problem: ImportProblem;
  constructor(problem: ImportProblem) {
    super(problem.message);
    this.name = 'FatalImportProblem';
    this.problem = problem;
  }
}

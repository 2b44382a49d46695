/**
 * Record readers over decoded text: CSV (RFC 4180) and JSON Lines.
 *
 * Both stream: text goes in as it arrives and records come out one by one, so memory does not
 * grow with the file. Structural problems (an unclosed quote, a record longer than the cap)
 * stop reading with a FatalImportProblem that names the row.
 *
 * CSV: a line without any double quote (or stray carriage return) is a record whose fields are
 * exactly its comma-separated pieces — RFC 4180 leaves no other reading — and is split
 * directly, which is several times faster than a general parser on large numeric files. Any
 * record with quotes (which may span lines: it ends at the first line end where the count of
 * quote characters is even) is handed whole to csv-parse, which applies RFC 4180 quoting and
 * reports malformed quoting.
 */
import { parse as parseCsvSync } from 'csv-parse/sync';
import { CsvError } from 'csv-parse';
import { describeColumn } from '../../data-columns';
import { DETAIL, FatalImportProblem, problemAt } from './problems';

export interface CsvRecord {
  /** 1-based record number; the header is row 1 (blank lines are skipped and not counted). */
  row: number;
  cells: string[];
}

function countQuotes(text: string, from: number, to: number): number {
  let n = 0;
  let i = text.indexOf('"', from);
  while (i !== -1 && i < to) {
    n++;
    i = text.indexOf('"', i + 1);
  }
  return n;
}

function csvProblem(error: CsvError, row: number, header: string[] | null, maxRecordChars: number): FatalImportProblem {
  const index = (error as CsvError & { index?: unknown }).index;
  const column =
    typeof index === 'number' && header !== null && index < header.length ? describeColumn(index, header[index].trim()) : null;
  const where = { row, column, kind: 'csv' as const };
  switch (error.code) {
    case 'CSV_QUOTE_NOT_CLOSED':
      return new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvQuoteNotClosed));
    case 'CSV_INVALID_CLOSING_QUOTE':
    case 'INVALID_OPENING_QUOTE':
    case 'CSV_NON_TRIMABLE_CHAR_AFTER_CLOSING_QUOTE':
      return new FatalImportProblem(problemAt(where, DETAIL.csvBadQuote));
    case 'CSV_MAX_RECORD_SIZE':
      return new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvRecordTooLarge(maxRecordChars)));
    default:
      return new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvMalformed(error.code)));
  }
}

/** CSV records from decoded text chunks. Stops cleanly when the consumer stops iterating. */
export async function* readCsv(texts: AsyncIterable<string>, maxRecordChars: number): AsyncGenerator<CsvRecord> {
  let pending = '';
  let row = 0;
  let header: string[] | null = null;

  /** Parses `text` (one quoted record, possibly with its line end) with csv-parse. */
  const slow = (text: string): string[][] => {
    try {
      return parseCsvSync(text, { relax_column_count: true, skip_empty_lines: true, max_record_size: maxRecordChars }) as string[][];
    } catch (error) {
      if (error instanceof CsvError) throw csvProblem(error, row + 1, header, maxRecordChars);
      throw error;
    }
  };

  /**
   * Takes complete records from `pending` starting at 0; returns where the unconsumed text
   * starts. At the end of the file (`final`), the rest is a record even without a line end.
   */
  function* take(final: boolean): Generator<CsvRecord, number> {
    let start = 0;
    const n = pending.length;
    // Next quote / carriage return at or after `start` (-1: none left); searched lazily so
    // that a file without quotes is scanned once, not once per line.
    let nextQuote = -2;
    let nextCr = -2;
    while (start < n) {
      let nl = pending.indexOf('\n', start);
      if (nl === -1) {
        if (!final) return start;
        nl = n;
      }
      const end = nl > start && pending.charCodeAt(nl - 1) === 13 ? nl - 1 : nl;
      if (nextQuote !== -1 && nextQuote < start) nextQuote = pending.indexOf('"', start);
      if (nextCr !== -1 && nextCr < start) nextCr = pending.indexOf('\r', start);
      const quoted = nextQuote !== -1 && nextQuote < nl;
      const strayCr = !quoted && nextCr !== -1 && nextCr < end;
      if (!quoted && !strayCr) {
        const line = pending.slice(start, end);
        start = nl + 1;
        if (line === '') continue;
        row++;
        const cells = line.split(',');
        if (header === null) header = cells;
        yield { row, cells };
        continue;
      }
      // A quoted record: extend to the first line end where the quotes balance.
      let quotes = countQuotes(pending, start, nl);
      while (quotes % 2 === 1 && nl < n) {
        const next = pending.indexOf('\n', nl + 1);
        if (next === -1) {
          if (!final) return start;
          quotes += countQuotes(pending, nl + 1, n);
          nl = n;
          break;
        }
        quotes += countQuotes(pending, nl + 1, next);
        nl = next;
      }
      const text = pending.slice(start, Math.min(nl + 1, n));
      start = nl + 1;
      for (const cells of slow(text)) {
        row++;
        if (header === null) header = cells;
        yield { row, cells };
      }
    }
    return n;
  }

  for await (const text of texts) {
    pending = pending.length === 0 ? text : pending + text;
    const consumed = yield* take(false);
    pending = pending.slice(consumed);
    if (pending.length > maxRecordChars) {
      throw new FatalImportProblem(problemAt({ row: row + 1, column: null, kind: 'csv' }, DETAIL.csvRecordTooLarge(maxRecordChars)));
    }
  }
  if (pending.length > 0) yield* take(true);
}

export interface JsonLine {
  /** 1-based line number. */
  row: number;
  text: string;
}

/** Non-blank lines from text chunks (LF or CRLF), with their line numbers. */
export async function* readLines(texts: AsyncIterable<string>, maxLineChars: number): AsyncGenerator<JsonLine> {
  let pending = '';
  let row = 0;
  for await (const text of texts) {
    let chunk = pending + text;
    let start = 0;
    let nl = chunk.indexOf('\n', start);
    while (nl !== -1) {
      row++;
      const end = nl > start && chunk.charCodeAt(nl - 1) === 13 ? nl - 1 : nl;
      const line = chunk.slice(start, end);
      if (line.trim() !== '') yield { row, text: line };
      start = nl + 1;
      nl = chunk.indexOf('\n', start);
    }
    pending = chunk.slice(start);
    chunk = '';
    if (pending.length > maxLineChars) {
      throw new FatalImportProblem(problemAt({ row: row + 1, column: null, kind: 'jsonl' }, DETAIL.lineTooLong(maxLineChars)));
    }
  }
  if (pending.trim() !== '') {
    row++;
    const line = pending.endsWith('\r') ? pending.slice(0, -1) : pending;
    yield { row, text: line };
  }
}

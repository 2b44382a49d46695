/**
 * Record readers over decoded text: CSV (RFC 4180, through csv-parse) and JSON Lines.
 *
 * Both stream: text goes in as it arrives and records come out one by one, so memory does not
 * grow with the file. Structural problems (an unclosed quote, a line longer than the cap) stop
 * reading with a FatalImportProblem that names the row.
 */
import { parse, CsvError } from 'csv-parse';
import { describeColumn } from '../../data-columns';
import { DETAIL, FatalImportProblem, problemAt } from './problems';

export interface CsvRecord {
  /** 1-based record number; the header is row 1 (blank lines are skipped and not counted). */
  row: number;
  cells: string[];
}

/**
 * CSV records from text chunks. `header` (when known) names columns in structural messages.
 * Stops cleanly when the consumer stops iterating.
 */
export async function* readCsv(texts: AsyncIterable<string>, maxRecordChars: number): AsyncGenerator<CsvRecord> {
  const parser = parse({
    bom: true,
    relax_column_count: true,
    skip_empty_lines: true,
    max_record_size: maxRecordChars,
  });
  let header: string[] | null = null;
  let row = 0;
  let stopped = false;
  const feed = (async () => {
    try {
      for await (const text of texts) {
        if (stopped || parser.destroyed) return;
        if (!parser.write(text)) {
          await new Promise<void>((resolve) => {
            const done = () => {
              parser.off('drain', done);
              parser.off('close', done);
              resolve();
            };
            parser.on('drain', done);
            parser.on('close', done);
          });
        }
      }
      if (!parser.destroyed) parser.end();
    } catch (error) {
      parser.destroy(error instanceof Error ? error : new Error(String(error)));
    }
  })();
  try {
    for await (const cells of parser as AsyncIterable<string[]>) {
      row++;
      if (header === null) header = cells;
      yield { row, cells };
    }
  } catch (error) {
    if (error instanceof CsvError) {
      const failing = row + 1;
      const index = (error as CsvError & { index?: unknown }).index;
      const column =
        typeof index === 'number' && header !== null && index < header.length ? describeColumn(index, header[index].trim()) : null;
      const where = { row: failing, column, kind: 'csv' as const };
      switch (error.code) {
        case 'CSV_QUOTE_NOT_CLOSED':
          throw new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvQuoteNotClosed));
        case 'CSV_INVALID_CLOSING_QUOTE':
        case 'INVALID_OPENING_QUOTE':
        case 'CSV_NON_TRIMABLE_CHAR_AFTER_CLOSING_QUOTE':
          throw new FatalImportProblem(problemAt(where, DETAIL.csvBadQuote));
        case 'CSV_MAX_RECORD_SIZE':
          throw new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvRecordTooLarge(maxRecordChars)));
        default:
          throw new FatalImportProblem(problemAt({ ...where, column: null }, DETAIL.csvMalformed(error.code)));
      }
    }
    throw error;
  } finally {
    stopped = true;
    if (!parser.destroyed) parser.destroy();
    await feed;
  }
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

/**
 * PostgreSQL's COPY text format (https://www.postgresql.org/docs/current/sql-copy.html, "Text
 * Format"), for the standings writer's `COPY … FROM STDIN`: one line per row, fields separated by a
 * tab, `\N` for null, and a backslash escaping the backslash, tab, newline and carriage return in
 * data. bytea values are written in bytea's hex format (`\x` + hex digits), whose own backslash is
 * escaped like any other. No ORM and no project imports: the writer thread loads this.
 */

/** One field: null → \N; a number as JavaScript prints it (shortest round-trip form, which float8 reads back exactly); bytes as \\x + hex; text escaped. */
export function copyField(v: unknown): string {
  if (v === null || v === undefined) return '\\N';
  if (typeof v === 'number') {
    if (!Number.isFinite(v)) throw new RangeError(`COPY text: ${v} is not a finite number`);
    return String(v);
  }
  if (v instanceof Uint8Array) return `\\\\x${Buffer.from(v.buffer, v.byteOffset, v.byteLength).toString('hex')}`;
  return String(v).replace(/[\\\t\n\r]/g, (c) => (c === '\\' ? '\\\\' : c === '\t' ? '\\t' : c === '\n' ? '\\n' : '\\r'));
}

/** One row as a line of COPY text (with its newline). */
export function copyLine(values: readonly unknown[]): string {
  return `${values.map(copyField).join('\t')}\n`;
}

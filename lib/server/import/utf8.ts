/**
 * Streaming UTF-8 decoding that refuses anything that is not UTF-8 and says where.
 *
 * Decoding uses TextDecoder with `fatal: true` (a leading byte-order mark is dropped). When it
 * refuses a chunk, `firstInvalidUtf8` (a validator with the same rules: no overlong forms, no
 * surrogates, nothing above U+10FFFF) finds the offending byte so the message can name its
 * offset and line.
 */
import { DETAIL, FatalImportProblem, problemAt } from './problems';

/**
 * Index of the first byte that does not start a valid UTF-8 sequence, scanning `bytes` from
 * `start`; -1 when all is valid. A sequence cut off by the end of `bytes` counts as valid when
 * `final` is false (the rest may come in the next chunk).
 */
export function firstInvalidUtf8(bytes: Uint8Array, start = 0, final = true): number {
  const n = bytes.length;
  let i = start;
  while (i < n) {
    const b = bytes[i];
    if (b < 0x80) {
      i++;
      continue;
    }
    let need: number;
    let min: number;
    let max = 0xbf;
    if (b >= 0xc2 && b <= 0xdf) {
      need = 1;
      min = 0x80;
    } else if (b >= 0xe0 && b <= 0xef) {
      need = 2;
      min = b === 0xe0 ? 0xa0 : 0x80;
      if (b === 0xed) max = 0x9f;
    } else if (b >= 0xf0 && b <= 0xf4) {
      need = 3;
      min = b === 0xf0 ? 0x90 : 0x80;
      if (b === 0xf4) max = 0x8f;
    } else {
      return i;
    }
    for (let k = 1; k <= need; k++) {
      if (i + k >= n) return final ? i : -1;
      const c = bytes[i + k];
      const lo = k === 1 ? min : 0x80;
      const hi = k === 1 ? max : 0xbf;
      if (c < lo || c > hi) return i;
    }
    i += need + 1;
  }
  return -1;
}

/** Number of bytes at the end of `bytes` that start an incomplete multi-byte sequence (0–3). */
function incompleteTail(bytes: Uint8Array): number {
  const n = bytes.length;
  for (let back = 1; back <= Math.min(3, n); back++) {
    const b = bytes[n - back];
    if (b >= 0x80 && b < 0xc0) continue; // continuation byte: keep looking for the lead
    if (b >= 0xc0) {
      const len = b >= 0xf0 ? 4 : b >= 0xe0 ? 3 : 2;
      return len > back ? back : 0;
    }
    return 0;
  }
  return 0;
}

function countNewlines(bytes: Uint8Array, end: number): number {
  let count = 0;
  let i = bytes.indexOf(0x0a);
  while (i !== -1 && i < end) {
    count++;
    i = bytes.indexOf(0x0a, i + 1);
  }
  return count;
}

export interface DecodeProgress {
  /** Bytes consumed so far. */
  bytes: number;
}

/**
 * Decodes a byte stream to text chunks. Throws FatalImportProblem (`Line <n>: …`) at the
 * first byte that is not UTF-8. `onBytes` is called after each chunk with the total so far.
 */
export async function* decodeUtf8(
  source: AsyncIterable<Uint8Array>,
  onBytes?: (total: number) => void,
): AsyncGenerator<string> {
  const decoder = new TextDecoder('utf-8', { fatal: true });
  let offset = 0;
  let lines = 1;
  let previousTail = new Uint8Array(0);
  for await (const raw of source) {
    const chunk = raw instanceof Uint8Array ? raw : new Uint8Array(raw);
    let text: string;
    try {
      text = decoder.decode(chunk, { stream: true });
    } catch {
      const joined = new Uint8Array(previousTail.length + chunk.length);
      joined.set(previousTail, 0);
      joined.set(chunk, previousTail.length);
      let at = firstInvalidUtf8(joined, 0, false);
      if (at < 0) at = previousTail.length;
      const absolute = offset - previousTail.length + at;
      const line = lines + countNewlines(joined.subarray(previousTail.length), Math.max(0, at - previousTail.length));
      throw new FatalImportProblem(
        problemAt({ row: line, column: null, kind: 'line' }, DETAIL.notUtf8(joined[at], absolute)),
      );
    }
    lines += countNewlines(chunk, chunk.length);
    // The last (up to 3) bytes seen, across chunk boundaries, to find an unfinished character.
    const last = new Uint8Array(Math.min(3, previousTail.length + chunk.length));
    const fromChunk = Math.min(chunk.length, last.length);
    last.set(previousTail.subarray(previousTail.length - (last.length - fromChunk)), 0);
    last.set(chunk.subarray(chunk.length - fromChunk), last.length - fromChunk);
    const tail = incompleteTail(last);
    previousTail = last.slice(last.length - tail);
    offset += chunk.length;
    onBytes?.(offset);
    if (text.length > 0) yield text;
  }
  try {
    const rest = decoder.decode();
    if (rest.length > 0) yield rest;
  } catch {
    throw new FatalImportProblem(
      problemAt({ row: lines, column: null, kind: 'line' }, DETAIL.notUtf8AtEnd(offset - previousTail.length)),
    );
  }
}


/**
 * Feature values: decimal text → float32, with the reason when a cell is not a usable number.
 *
 * Accepted: optional sign, digits with an optional fraction, optional exponent (`-1.5e-3`,
 * `.5`, `7.`), surrounding spaces. Refused: empty cells, NaN / Infinity in any spelling, hex,
 * binary, digit separators, and values beyond the float32 range (|v| > 3.4028235e38), which
 * would be stored as infinity.
 */
import { DETAIL } from './problems';

const NUMBER_RE = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const NON_FINITE_RE = /^[+-]?(?:nan|inf|infinity)$/i;

/** Largest finite float32. */
export const FLOAT32_MAX = 3.4028234663852886e38;

/**
 * Parses one cell. Returns the float32 value as a number, or a string: the problem's detail
 * sentence (see DETAIL).
 */
export function parseFeatureText(text: string): number | string {
  let s = text;
  const n = s.length;
  if (n === 0) return DETAIL.emptyNumber;
  if (s.charCodeAt(0) === 32 || s.charCodeAt(n - 1) === 32 || s.charCodeAt(0) === 9 || s.charCodeAt(n - 1) === 9) {
    s = s.trim();
    if (s === '') return DETAIL.emptyNumber;
  }
  if (!NUMBER_RE.test(s)) {
    return NON_FINITE_RE.test(s) ? DETAIL.notFinite(s) : DETAIL.notNumber(s);
  }
  const v = Number(s);
  if (!Number.isFinite(v)) return DETAIL.outOfRange(s);
  const f = Math.fround(v);
  if (!Number.isFinite(f)) return DETAIL.outOfRange(s);
  return f;
}

/** Checks a JSON value as a feature; returns the float32 value or the problem's detail. */
export function checkFeatureJson(value: unknown): number | string {
  if (typeof value === 'number') {
    // JSON.parse only yields finite numbers, but a huge literal becomes Infinity.
    if (!Number.isFinite(value)) return DETAIL.outOfRange(String(value));
    const f = Math.fround(value);
    if (!Number.isFinite(f)) return DETAIL.outOfRange(String(value));
    return f;
  }
  if (value === null) return DETAIL.jsonNotNumber('null');
  if (typeof value === 'string') return DETAIL.jsonNotNumber(JSON.stringify(value.length > 40 ? `${value.slice(0, 39)}…` : value));
  return DETAIL.jsonNotNumber(Array.isArray(value) ? 'an array' : typeof value === 'object' ? 'an object' : String(value));
}

/**
 * The shortest decimal text that reads back as exactly the same float32 (for exports, so that
 * export → import is byte-identical).
 */
export function formatFloat32(value: number): string {
  if (value === 0) return Object.is(value, -0) ? '-0' : '0';
  for (let p = 6; p <= 9; p++) {
    const s = value.toPrecision(p);
    const back = Number(s);
    if (Math.fround(back) === value) return String(back);
  }
  return String(value);
}

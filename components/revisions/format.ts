/** Number formats of the Revisions and Boundary screens (exact enough to compare, short enough to read). */
export function num(v: number | null | undefined, digits = 4): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  if (Number.isInteger(v)) return v.toLocaleString('en-US');
  return v.toPrecision(digits);
}

export function pct(v: number | null | undefined): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  return `${(v * 100).toFixed(1)} %`;
}

'use client';

import { bin, extent } from 'd3-array';
import { scaleLinear } from 'd3-scale';
import { useId, useMemo, useState } from 'react';
import { DownloadCsv } from './DownloadCsv';
import { classStyle, shapePath } from './shapes';

const W = 720;
const ROW = 70;
const M = { left: 120, right: 16, top: 8, bottom: 30 };

/**
 * Signed distances to one boundary, one histogram row per class on a shared axis (small
 * multiples, so no class hides another), with the margin band |distance| ≤ 1/‖w‖ shaded and the
 * hyperplane at 0. Bars are binned with d3-array; the counts are in the table below the chart.
 */
export function DistanceHistogram({ x, c, classes, band, positive }: { x: readonly number[]; c: readonly number[]; classes: readonly string[]; band: number | null; positive: string }) {
  const id = useId();
  const [active, setActive] = useState<{ k: number; b: number } | null>(null);
  const { thresholds, counts, domain } = useMemo(() => {
    const [lo0, hi0] = extent(x) as [number | undefined, number | undefined];
    let lo = Math.min(lo0 ?? -1, band !== null ? -band * 1.2 : 0);
    let hi = Math.max(hi0 ?? 1, band !== null ? band * 1.2 : 0);
    if (lo === hi) {
      lo -= 1;
      hi += 1;
    }
    const nice = scaleLinear().domain([lo, hi]).nice(40);
    const [a, b] = nice.domain();
    const step = (b - a) / 40;
    const th = Array.from({ length: 39 }, (_, k) => a + step * (k + 1));
    const binner = bin<number, number>().domain([a, b]).thresholds(th);
    const perClass = classes.map((_, k) => binner(x.filter((_, i) => c[i] === k)).map((bb) => bb.length));
    return { thresholds: [a, ...th, b], counts: perClass, domain: [a, b] as [number, number] };
  }, [x, c, classes, band]);
  const sx = scaleLinear().domain(domain).range([M.left, W - M.right]);
  const maxCount = Math.max(1, ...counts.flat());
  const totals = counts.map((r) => r.reduce((s, v) => s + v, 0));
  // classes without samples here (e.g. outside a chosen pair) get no row
  const visible = classes.map((_, k) => k).filter((k) => totals[k] > 0);
  const H = M.top + ROW * Math.max(1, visible.length) + M.bottom;
  const total = totals.reduce((s, v) => s + v, 0);
  const readout = active ? `${classes[active.k]}: ${counts[active.k][active.b]} samples with distance in [${thresholds[active.b].toPrecision(4)}, ${thresholds[active.b + 1].toPrecision(4)})` : '\u00a0';
  const rows = thresholds.slice(0, -1).map((t, b) => [t, thresholds[b + 1], ...counts.map((r) => r[b])]);
  return (
    <figure className="space-y-2 rounded border border-slate-300 bg-white p-3">
      <figcaption className="flex flex-wrap items-baseline justify-between gap-2">
        <span className="font-semibold">Signed distance to the boundary, per class</span>
        <DownloadCsv filename="distance-histogram.csv" header={['from', 'to', ...classes]} rows={rows} />
      </figcaption>
      <svg
        viewBox={`0 0 ${W} ${H}`}
        className="h-auto w-full"
        role="img"
        tabIndex={0}
        aria-label={`Histogram of signed distances to the ${positive} boundary for ${total} samples, one row per class`}
        aria-describedby={`${id}-desc`}
        onKeyDown={(e) => {
          const dir = { ArrowRight: [0, 1], ArrowLeft: [0, -1], ArrowUp: [-1, 0], ArrowDown: [1, 0] }[e.key];
          if (!dir) return;
          e.preventDefault();
          const k0 = active?.k ?? 0;
          const b0 = active?.b ?? 0;
          const row = Math.max(0, visible.indexOf(k0));
          setActive({ k: visible[(row + dir[0] + visible.length) % visible.length] ?? 0, b: Math.min(counts[0].length - 1, Math.max(0, b0 + dir[1])) });
        }}
        onFocus={() => setActive((a) => a ?? { k: visible[0] ?? 0, b: 0 })}
        onMouseLeave={() => setActive(null)}
      >
        {band !== null ? (
          <g>
            <rect x={sx(-band)} y={M.top} width={sx(band) - sx(-band)} height={ROW * Math.max(1, visible.length)} fill="#f0e442" fillOpacity={0.25} />
            <line x1={sx(-band)} x2={sx(-band)} y1={M.top} y2={H - M.bottom} stroke="#1d232b" strokeDasharray="4 3" />
            <line x1={sx(band)} x2={sx(band)} y1={M.top} y2={H - M.bottom} stroke="#1d232b" strokeDasharray="4 3" />
          </g>
        ) : null}
        <line x1={sx(0)} x2={sx(0)} y1={M.top} y2={H - M.bottom} stroke="#1d232b" strokeWidth={1.5} />
        {visible.map((k, row) => {
          const name = classes[k];
          const top = M.top + ROW * row;
          const sy = scaleLinear().domain([0, maxCount]).range([top + ROW - 6, top + 8]);
          const { colour, shape } = classStyle(k);
          return (
            <g key={name}>
              <line x1={M.left} x2={W - M.right} y1={top + ROW - 6} y2={top + ROW - 6} stroke="#94a3b8" />
              <path d={shapePath(shape, 5)} transform={`translate(${10} ${top + ROW / 2})`} fill={colour} />
              <text x={20} y={top + ROW / 2} dy="0.32em" fontSize="12" fill="#1d232b">
                {name} ({totals[k]})
              </text>
              {counts[k].map((v, b) =>
                v === 0 ? null : (
                  <rect
                    key={b}
                    x={sx(thresholds[b]) + 0.5}
                    width={Math.max(1, sx(thresholds[b + 1]) - sx(thresholds[b]) - 1)}
                    y={sy(v)}
                    height={top + ROW - 6 - sy(v)}
                    fill={colour}
                    stroke={active?.k === k && active.b === b ? '#1d232b' : 'none'}
                    strokeWidth={2}
                    onMouseEnter={() => setActive({ k, b })}
                  />
                ),
              )}
            </g>
          );
        })}
        {sx.ticks(8).map((t) => (
          <text key={t} x={sx(t)} y={H - M.bottom + 14} textAnchor="middle" fontSize="11" fill="#334155">
            {t}
          </text>
        ))}
        <text x={(M.left + W - M.right) / 2} y={H - 3} textAnchor="middle" fontSize="11" fill="#334155">
          signed distance f(x)/‖w‖ (right of 0: {positive} side)
        </text>
      </svg>
      <p id={`${id}-desc`} className="text-xs text-slate-700">
        {band !== null
          ? `The solid line is the hyperplane; the shaded band between the dashed lines is the margin (±${band.toPrecision(4)}). Bars of the ${positive} row left of 0, and bars of the other rows right of 0, are on the wrong side.`
          : `The solid line is where the rule ${positive} changes sides; there is no margin band. Samples right of 0 are placed on the side of the first class, left of 0 on the other.`}{' '}
        Focus the chart and use the arrow keys to read each bar.
      </p>
      <p aria-live="polite" className="min-h-5 text-sm tabular-nums">
        {readout}
      </p>
      <p className="text-sm" data-testid="histogram-total" data-total={total}>
        {total.toLocaleString('en-US')} samples in the histogram.
      </p>
      <details>
        <summary className="cursor-pointer text-sm underline">Histogram counts as a table</summary>
        <div className="max-h-72 overflow-auto" tabIndex={0} role="region" aria-label="Histogram counts">
          <table className="border-collapse text-xs tabular-nums" data-testid="histogram-table">
            <thead>
              <tr className="border-b border-slate-300">
                <th scope="col" className="px-2 text-left">Distance from</th>
                <th scope="col" className="px-2 text-left">to</th>
                {classes.map((n) => (
                  <th key={n} scope="col" className="px-2 text-right">
                    {n}
                  </th>
                ))}
              </tr>
            </thead>
            <tbody>
              {rows.map((r) => (
                <tr key={String(r[0])} className="border-b border-slate-100">
                  <td className="px-2">{(r[0] as number).toPrecision(4)}</td>
                  <td className="px-2">{(r[1] as number).toPrecision(4)}</td>
                  {r.slice(2).map((v, k) => (
                    <td key={classes[k]} className="px-2 text-right">
                      {v}
                    </td>
                  ))}
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      </details>
    </figure>
  );
}

'use client';

import { scaleLinear } from 'd3-scale';
import { line } from 'd3-shape';
import { useId, useState } from 'react';
import { DownloadCsv } from './DownloadCsv';
import { classStyle, shapePath } from './shapes';

export interface LineSeries {
  readonly name: string;
  /** class index for the colour and shape */
  readonly classIndex: number;
  /** one value per revision in `revisions` order (null: no fit / no value) */
  readonly values: readonly (number | null)[];
}

export interface SettingsMark {
  readonly revision: number;
  readonly changed: readonly string[];
}

const W = 460;
const H = 220;
const M = { top: 16, right: 16, bottom: 36, left: 66 };

/**
 * A metric over revisions, one line per boundary, drawn with d3-scale / d3-shape in SVG. Where the
 * fit settings changed a dashed mark sits just before the revision, labelled, because margins
 * across it are not comparable. Keyboard: focus the chart, ←/→ move between revisions, ↑/↓
 * between boundaries; the exact value is announced in the caption.
 */
export function RevisionLineChart({ title, unit, revisions, series, marks, csvName }: { title: string; unit: string; revisions: readonly number[]; series: readonly LineSeries[]; marks: readonly SettingsMark[]; csvName: string }) {
  const id = useId();
  const [active, setActive] = useState<{ s: number; r: number } | null>(null);
  const all = series.flatMap((s) => s.values.filter((v): v is number => v !== null));
  const x = scaleLinear()
    .domain(revisions.length > 1 ? [revisions[0], revisions[revisions.length - 1]] : [(revisions[0] ?? 0) - 1, (revisions[0] ?? 0) + 1])
    .range([M.left, W - M.right]);
  const lo = Math.min(0, ...all);
  const hi = Math.max(...all, lo + 1e-9);
  const y = scaleLinear().domain([lo, hi]).nice().range([H - M.bottom, M.top]);
  const path = line<[number, number | null]>()
    .defined((d) => d[1] !== null)
    .x((d) => x(d[0]))
    .y((d) => y(d[1] as number));
  const xTicks = revisions.length <= 12 ? revisions : x.ticks(8).filter(Number.isInteger);
  const cur = active && series[active.s] && revisions[active.r] !== undefined ? { s: series[active.s], rev: revisions[active.r], v: series[active.s].values[active.r] } : null;
  const descId = `${id}-desc`;
  const marksText = marks.length
    ? `Settings changed before revision ${marks.map((m) => `${m.revision} (${m.changed.join(', ')})`).join('; ')}: values across a mark are not comparable.`
    : 'The fit settings were the same for every fitted revision.';
  const move = (ds: number, dr: number) => {
    const s0 = active?.s ?? 0;
    const r0 = active?.r ?? 0;
    setActive({ s: (s0 + ds + series.length) % Math.max(1, series.length), r: Math.min(revisions.length - 1, Math.max(0, r0 + dr)) });
  };
  return (
    <figure className="space-y-1 rounded border border-slate-300 bg-white p-3">
      <figcaption className="flex items-baseline justify-between gap-2">
        <span className="font-semibold">{title}</span>
        <DownloadCsv
          filename={csvName}
          header={['revision', ...series.map((s) => s.name)]}
          rows={revisions.map((r, k) => [r, ...series.map((s) => s.values[k])])}
        />
      </figcaption>
      <svg
        viewBox={`0 0 ${W} ${H}`}
        className="h-auto w-full touch-none"
        role="img"
        tabIndex={0}
        aria-label={`${title} over revisions ${revisions[0] ?? ''} to ${revisions[revisions.length - 1] ?? ''}, one line per boundary`}
        aria-describedby={descId}
        onKeyDown={(e) => {
          const k = { ArrowRight: [0, 1], ArrowLeft: [0, -1], ArrowUp: [-1, 0], ArrowDown: [1, 0] }[e.key];
          if (k) {
            e.preventDefault();
            move(k[0], k[1]);
          } else if (e.key === 'Escape') setActive(null);
        }}
        onFocus={() => setActive((a) => a ?? { s: 0, r: revisions.length - 1 })}
        onMouseLeave={() => setActive(null)}
      >
        {y.ticks(5).map((t) => (
          <g key={t}>
            <line x1={M.left} x2={W - M.right} y1={y(t)} y2={y(t)} stroke="#e2e8f0" />
            <text x={M.left - 6} y={y(t)} dy="0.32em" textAnchor="end" fontSize="11" fill="#334155">
              {y.tickFormat(5)(t)}
            </text>
          </g>
        ))}
        {xTicks.map((t) => (
          <text key={t} x={x(t)} y={H - M.bottom + 16} textAnchor="middle" fontSize="11" fill="#334155">
            {t}
          </text>
        ))}
        <text x={(M.left + W - M.right) / 2} y={H - 4} textAnchor="middle" fontSize="11" fill="#334155">
          revision
        </text>
        <text transform={`translate(12 ${(M.top + H - M.bottom) / 2}) rotate(-90)`} textAnchor="middle" fontSize="11" fill="#334155">
          {unit}
        </text>
        {marks.map((m) => {
          const k = revisions.indexOf(m.revision);
          const xm = k > 0 ? (x(revisions[k - 1]) + x(m.revision)) / 2 : x(m.revision) - 8;
          return (
            <g key={m.revision}>
              <line x1={xm} x2={xm} y1={M.top} y2={H - M.bottom} stroke="#1d232b" strokeDasharray="4 3" />
              <text x={xm + 3} y={M.top + 9} fontSize="10" fill="#1d232b">
                settings changed
              </text>
            </g>
          );
        })}
        {series.map((s, si) => {
          const { colour, shape } = classStyle(s.classIndex);
          return (
            <g key={s.name}>
              <path d={path(revisions.map((r, k) => [r, s.values[k]] as [number, number | null])) ?? ''} fill="none" stroke={colour} strokeWidth={2} />
              {revisions.map((r, k) => {
                const v = s.values[k];
                if (v === null) return null;
                const on = active?.s === si && active.r === k;
                return (
                  <path
                    key={r}
                    d={shapePath(shape, on ? 7 : 4.5)}
                    transform={`translate(${x(r)} ${y(v)})`}
                    fill={colour}
                    stroke={on ? '#1d232b' : 'white'}
                    strokeWidth={on ? 2 : 1}
                    onMouseEnter={() => setActive({ s: si, r: k })}
                  />
                );
              })}
            </g>
          );
        })}
      </svg>
      <p id={descId} className="text-xs text-slate-700">
        {marksText} Focus the chart and use the arrow keys to read exact values.
      </p>
      <ul className="flex flex-wrap gap-x-4 gap-y-1 text-xs">
        {series.map((s) => {
          const { colour, shape } = classStyle(s.classIndex);
          return (
            <li key={s.name} className="flex items-center gap-1">
              <svg aria-hidden="true" width="12" height="12" viewBox="-6 -6 12 12">
                <path d={shapePath(shape, 5)} fill={colour} />
              </svg>
              {s.name}
            </li>
          );
        })}
      </ul>
      <p aria-live="polite" className="min-h-5 text-sm tabular-nums" data-testid="chart-readout">
        {cur ? `Revision ${cur.rev}, ${cur.s.name}: ${cur.v === null ? 'no fit' : cur.v.toPrecision(6)} ${unit}` : '\u00a0'}
      </p>
    </figure>
  );
}

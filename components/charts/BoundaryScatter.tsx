'use client';

import { scaleLinear } from 'd3-scale';
import { extent } from 'd3-array';
import { useRouter } from 'next/navigation';
import { useEffect, useId, useMemo, useRef, useState } from 'react';
import { DownloadCsv } from './DownloadCsv';
import { classStyle, shapePath } from './shapes';

/** One point: Sample.id, external id, class index, x, y, decision value, flag bits (1 wrong side, 2 inside margin, 4 near, 8 pivot). */
export interface ScatterPoint {
  readonly id: string;
  readonly e: string;
  readonly c: number;
  readonly x: number;
  readonly y: number;
  readonly d: number;
  readonly f: number;
}

const W = 720;
const H = 460;
const M = { left: 56, right: 16, top: 16, bottom: 40 };
const CELL = 16;

export function flagWords(f: number): string[] {
  const out: string[] = [];
  if (f & 1) out.push('wrong side');
  if (f & 2) out.push('inside margin');
  if (f & 4) out.push('near boundary');
  if (f & 8) out.push('pivot');
  return out;
}
const outlined = (f: number) => (f & 3) !== 0;

/**
 * Every sample of one boundary on a canvas (thousands of points stay smooth): signed distance
 * across, the vertical direction up. Points are coloured AND shaped by label; wrong-side and
 * inside-margin points get a thick dark outline. Hover or keyboard focus shows the exact values;
 * a click (or Enter) opens the sample. Keyboard: ←/→ step through the points by signed distance,
 * F jumps to the next outlined point, Enter opens it, Esc clears.
 */
export function BoundaryScatter({ points, classes, band, positive, vertical, sampleHref, total }: { points: readonly ScatterPoint[]; classes: readonly string[]; band: number | null; positive: string; vertical: string; sampleHref: string; total: number }) {
  const canvas = useRef<HTMLCanvasElement>(null);
  const router = useRouter();
  const id = useId();
  const [active, setActive] = useState<number | null>(null);
  const { sx, sy, order, grid } = useMemo(() => {
    const [x0, x1] = extent(points, (p) => p.x) as [number | undefined, number | undefined];
    const [y0, y1] = extent(points, (p) => p.y) as [number | undefined, number | undefined];
    const bx = band ?? 0;
    const sx = scaleLinear()
      .domain([Math.min(x0 ?? -1, -bx * 1.2), Math.max(x1 ?? 1, bx * 1.2)])
      .nice()
      .range([M.left, W - M.right]);
    const sy = scaleLinear()
      .domain([y0 ?? -1, y1 === y0 ? (y1 ?? 0) + 1 : (y1 ?? 1)])
      .nice()
      .range([H - M.bottom, M.top]);
    const order = points.map((_, i) => i).sort((a, b) => points[a].x - points[b].x);
    const grid = new Map<number, number[]>();
    points.forEach((p, i) => {
      const key = Math.floor(sx(p.x) / CELL) * 10000 + Math.floor(sy(p.y) / CELL);
      const list = grid.get(key);
      if (list) list.push(i);
      else grid.set(key, [i]);
    });
    return { sx, sy, order, grid };
  }, [points, band]);

  useEffect(() => {
    const el = canvas.current;
    const ctx = el?.getContext('2d');
    if (!el || !ctx) return;
    const ratio = window.devicePixelRatio || 1;
    el.width = W * ratio;
    el.height = H * ratio;
    ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
    ctx.clearRect(0, 0, W, H);
    ctx.fillStyle = '#ffffff';
    ctx.fillRect(0, 0, W, H);
    // band and hyperplane
    if (band !== null) {
      ctx.fillStyle = 'rgba(240, 228, 66, 0.25)';
      ctx.fillRect(sx(-band), M.top, sx(band) - sx(-band), H - M.top - M.bottom);
      ctx.setLineDash([4, 3]);
      ctx.strokeStyle = '#1d232b';
      ctx.lineWidth = 1;
      for (const b of [-band, band]) {
        ctx.beginPath();
        ctx.moveTo(sx(b), M.top);
        ctx.lineTo(sx(b), H - M.bottom);
        ctx.stroke();
      }
      ctx.setLineDash([]);
    }
    ctx.strokeStyle = '#1d232b';
    ctx.lineWidth = 1.5;
    ctx.beginPath();
    ctx.moveTo(sx(0), M.top);
    ctx.lineTo(sx(0), H - M.bottom);
    ctx.stroke();
    // axes
    ctx.fillStyle = '#334155';
    ctx.font = '11px system-ui, sans-serif';
    ctx.textAlign = 'center';
    for (const t of sx.ticks(8)) ctx.fillText(String(t), sx(t), H - M.bottom + 16);
    ctx.fillText(`signed distance f(x)/‖w‖ (right of 0: ${positive} side)`, (M.left + W - M.right) / 2, H - 6);
    ctx.textAlign = 'right';
    for (const t of sy.ticks(6)) ctx.fillText(String(t), M.left - 6, sy(t) + 4);
    ctx.save();
    ctx.translate(14, (M.top + H - M.bottom) / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = 'center';
    ctx.fillText(vertical, 0, 0);
    ctx.restore();
    // points: unflagged first, outlined on top
    const shapes = classes.map((_, k) => {
      const s = classStyle(k);
      return { colour: s.colour, path: new Path2D(shapePath(s.shape, 3.5)), big: new Path2D(shapePath(s.shape, 4.5)) };
    });
    for (const pass of [0, 1]) {
      for (const p of points) {
        if (outlined(p.f) !== (pass === 1)) continue;
        const s = shapes[p.c] ?? shapes[0];
        ctx.save();
        ctx.translate(sx(p.x), sy(p.y));
        ctx.fillStyle = s.colour;
        if (pass === 1) {
          ctx.fill(s.big);
          ctx.lineWidth = 1.6;
          ctx.strokeStyle = '#1d232b';
          ctx.stroke(s.big);
        } else {
          ctx.globalAlpha = 0.8;
          ctx.fill(s.path);
        }
        ctx.restore();
      }
    }
  }, [points, classes, band, sx, sy, positive, vertical]);

  const nearest = (px: number, py: number): number | null => {
    let best: number | null = null;
    let bestD = 10 * 10;
    const cx = Math.floor(px / CELL);
    const cy = Math.floor(py / CELL);
    for (let dx = -1; dx <= 1; dx++)
      for (let dy = -1; dy <= 1; dy++)
        for (const i of grid.get((cx + dx) * 10000 + (cy + dy)) ?? []) {
          const d = (sx(points[i].x) - px) ** 2 + (sy(points[i].y) - py) ** 2;
          if (d < bestD) {
            bestD = d;
            best = i;
          }
        }
    return best;
  };
  const toLocal = (e: React.MouseEvent<HTMLCanvasElement>): [number, number] => {
    const r = e.currentTarget.getBoundingClientRect();
    return [((e.clientX - r.left) / r.width) * W, ((e.clientY - r.top) / r.height) * H];
  };
  const open = (i: number) => router.push(`${sampleHref}${encodeURIComponent(points[i].id)}`);
  const a = active !== null ? points[active] : null;
  const flaggedCount = points.filter((p) => outlined(p.f)).length;
  return (
    <figure className="space-y-2 rounded border border-slate-300 bg-white p-3">
      <figcaption className="flex flex-wrap items-baseline justify-between gap-2">
        <span className="font-semibold">Every sample against the boundary</span>
        <DownloadCsv
          filename="boundary-points.csv"
          header={['sample', 'label', 'signed distance', 'decision value', 'vertical', 'flags']}
          rows={points.map((p) => [p.e, classes[p.c] ?? '', p.x, p.d, p.y, flagWords(p.f).join(' ')])}
        />
      </figcaption>
      <div className="relative">
        <canvas
          ref={canvas}
          className="h-auto w-full cursor-crosshair"
          style={{ aspectRatio: `${W} / ${H}` }}
          role="img"
          tabIndex={0}
          aria-label={`Scatter of ${points.length}${points.length < total ? ` of ${total}` : ''} samples: signed distance to the ${positive} boundary across, ${vertical} up; ${flaggedCount} outlined as wrong side or inside the margin`}
          aria-describedby={`${id}-desc`}
          onMouseMove={(e) => {
            const [px, py] = toLocal(e);
            setActive(nearest(px, py));
          }}
          onMouseLeave={() => setActive(null)}
          onClick={(e) => {
            const [px, py] = toLocal(e);
            const i = nearest(px, py);
            if (i !== null) open(i);
          }}
          onKeyDown={(e) => {
            if (points.length === 0) return;
            const pos = active === null ? -1 : order.indexOf(active);
            if (e.key === 'ArrowRight' || e.key === 'ArrowLeft') {
              e.preventDefault();
              const next = Math.min(order.length - 1, Math.max(0, pos + (e.key === 'ArrowRight' ? 1 : -1)));
              setActive(order[next]);
            } else if (e.key === 'f' || e.key === 'F') {
              e.preventDefault();
              for (let k = 1; k <= order.length; k++) {
                const i = order[(pos + k + order.length) % order.length];
                if (outlined(points[i].f)) {
                  setActive(i);
                  break;
                }
              }
            } else if (e.key === 'Enter' && active !== null) {
              e.preventDefault();
              open(active);
            } else if (e.key === 'Escape') setActive(null);
          }}
        />
        {a ? (
          <div
            className="pointer-events-none absolute z-10 rounded border border-slate-400 bg-white px-2 py-1 text-xs shadow"
            style={{ left: `${Math.min(75, (sx(a.x) / W) * 100)}%`, top: `${Math.min(80, (sy(a.y) / H) * 100)}%`, transform: 'translate(8px, 8px)' }}
            data-testid="scatter-tooltip"
          >
            <div className="font-semibold">{a.e}</div>
            <div>label {classes[a.c]}</div>
            <div className="tabular-nums">distance {a.x.toPrecision(6)}</div>
            <div className="tabular-nums">f(x) {a.d.toPrecision(6)}</div>
            <div className="tabular-nums">vertical {a.y.toPrecision(6)}</div>
            <div>{flagWords(a.f).join(', ') || 'no flags'}</div>
          </div>
        ) : null}
      </div>
      <p aria-live="polite" className="min-h-5 text-sm tabular-nums">
        {a ? `${a.e}, label ${classes[a.c]}, distance ${a.x.toPrecision(6)}, f(x) ${a.d.toPrecision(6)}, vertical ${a.y.toPrecision(6)}, ${flagWords(a.f).join(', ') || 'no flags'}. Enter opens it.` : '\u00a0'}
      </p>
      <ul className="flex flex-wrap gap-x-4 gap-y-1 text-xs">
        {classes.map((name, k) => {
          const { colour, shape } = classStyle(k);
          if (!points.some((p) => p.c === k)) return null;
          return (
            <li key={name} className="flex items-center gap-1">
              <svg aria-hidden="true" width="12" height="12" viewBox="-6 -6 12 12">
                <path d={shapePath(shape, 5)} fill={colour} />
              </svg>
              {name} ({points.filter((p) => p.c === k).length})
            </li>
          );
        })}
        <li className="flex items-center gap-1">
          <svg aria-hidden="true" width="12" height="12" viewBox="-6 -6 12 12">
            <circle r="4.5" fill="white" stroke="#1d232b" strokeWidth="1.6" />
          </svg>
          dark outline: wrong side or inside the margin ({flaggedCount})
        </li>
      </ul>
      {points.length < total ? (
        <p className="text-sm">
          Showing {points.length.toLocaleString('en-US')} of {total.toLocaleString('en-US')} samples: the outlined ones first, the rest evenly spaced. The histogram above counts every sample.
        </p>
      ) : null}
      <p id={`${id}-desc`} className="text-xs text-slate-700">
        The solid line is the hyperplane, the shaded band the margin. Hover a point for its values, click to open it. With the keyboard: focus the picture, ←/→ step through the samples by distance, F jumps to the next outlined sample, Enter opens it.
      </p>
    </figure>
  );
}

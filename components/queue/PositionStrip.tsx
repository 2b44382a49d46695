/**
 * Where a sample sits on the signed-distance axis of the boundary between its label and its rival,
 * in margin half-widths: the margin band is [−1, 1], the boundary is at 0, its own side is to the
 * right. The filled triangle is the fitted position, the hollow circle the held-out one; both are
 * also written out in the caption, so nothing depends on reading the picture.
 */
const RANGE = 3;

function x(v: number, width: number, pad: number): number {
  const c = Math.max(-RANGE, Math.min(RANGE, v));
  return pad + ((c + RANGE) / (2 * RANGE)) * (width - 2 * pad);
}

export function PositionStrip({
  position,
  heldOut,
  own,
  rival,
  nearBand,
}: {
  position: number;
  heldOut: number | null;
  own: string;
  rival: string;
  nearBand: number;
}) {
  const W = 560;
  const H = 74;
  const pad = 16;
  const axisY = 38;
  const ticks = [-3, -2, -1, 0, 1, 2, 3];
  const px = x(position, W, pad);
  const clipped = Math.abs(position) > RANGE;
  return (
    <figure className="space-y-1">
      <svg role="img" aria-label={`Position ${position.toFixed(2)} on the axis from ${rival} (left) to ${own} (right)`} viewBox={`0 0 ${W} ${H}`} className="w-full max-w-xl">
        <rect x={x(-1, W, pad)} y={axisY - 14} width={x(1, W, pad) - x(-1, W, pad)} height={28} fill="#56b4e9" opacity={0.18} />
        <rect
          x={x(-nearBand, W, pad)}
          y={axisY - 14}
          width={x(nearBand, W, pad) - x(-nearBand, W, pad)}
          height={28}
          fill="none"
          stroke="#56b4e9"
          strokeDasharray="3 3"
        />
        <line x1={pad} y1={axisY} x2={W - pad} y2={axisY} stroke="#1d232b" strokeWidth={1} />
        <line x1={x(0, W, pad)} y1={axisY - 18} x2={x(0, W, pad)} y2={axisY + 18} stroke="#1d232b" strokeWidth={2} />
        {ticks.map((t) => (
          <g key={t}>
            <line x1={x(t, W, pad)} y1={axisY + 14} x2={x(t, W, pad)} y2={axisY + 18} stroke="#1d232b" />
            <text x={x(t, W, pad)} y={axisY + 30} fontSize={10} textAnchor="middle" fill="#1d232b">
              {t === 0 ? '0' : t > 0 ? `+${t}` : `−${-t}`}
            </text>
          </g>
        ))}
        <text x={pad} y={11} fontSize={11} fill="#8a3c00">
          ← wrong side ({rival})
        </text>
        <text x={W - pad} y={11} fontSize={11} textAnchor="end" fill="#00674b">
          own side ({own}) →
        </text>
        {heldOut !== null && <circle cx={x(heldOut, W, pad)} cy={axisY} r={6} fill="white" stroke="#cc79a7" strokeWidth={2.5} />}
        <polygon points={`${px},${axisY - 2} ${px - 7},${axisY - 15} ${px + 7},${axisY - 15}`} fill="#d55e00" stroke="#1d232b" strokeWidth={0.8} />
      </svg>
      <figcaption className="text-xs text-slate-700">
        ▼ fitted position {position >= 0 ? '+' : '−'}
        {Math.abs(position).toFixed(2)}
        {clipped ? ' (beyond the drawn range)' : ''}
        {heldOut !== null ? ` · ○ held out ${heldOut >= 0 ? '+' : '−'}${Math.abs(heldOut).toFixed(2)}` : ''} · shaded: the margin (±1) · dashed: near-boundary band (±
        {nearBand.toFixed(2)})
      </figcaption>
    </figure>
  );
}

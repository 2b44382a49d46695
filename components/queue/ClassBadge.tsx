/**
 * A class name with its colour AND its shape, so the class is never told by colour alone.
 * Colours follow the Okabe–Ito palette in class order; shapes cycle independently.
 */
const COLOURS = ['#0072b2', '#e69f00', '#009e73', '#cc79a7', '#56b4e9', '#d55e00', '#f0e442'] as const;
const SHAPES = ['circle', 'square', 'triangle', 'diamond', 'cross', 'star', 'bar'] as const;

export function classStyle(index: number): { colour: string; shape: (typeof SHAPES)[number] } {
  const i = index < 0 ? 0 : index;
  return { colour: COLOURS[i % COLOURS.length], shape: SHAPES[i % SHAPES.length] };
}

export function ClassShape({ index, size = 12 }: { index: number; size?: number }) {
  const { colour, shape } = classStyle(index);
  const h = size / 2;
  return (
    <svg aria-hidden="true" width={size} height={size} viewBox={`0 0 ${size} ${size}`} className="inline-block shrink-0 align-[-1px]">
      {shape === 'circle' && <circle cx={h} cy={h} r={h - 1} fill={colour} />}
      {shape === 'square' && <rect x={1} y={1} width={size - 2} height={size - 2} fill={colour} />}
      {shape === 'triangle' && <polygon points={`${h},1 ${size - 1},${size - 1} 1,${size - 1}`} fill={colour} />}
      {shape === 'diamond' && <polygon points={`${h},0 ${size},${h} ${h},${size} 0,${h}`} fill={colour} />}
      {shape === 'cross' && <path d={`M1 1 L${size - 1} ${size - 1} M${size - 1} 1 L1 ${size - 1}`} stroke={colour} strokeWidth={2.5} />}
      {shape === 'star' && <polygon points={`${h},0 ${h * 1.3},${h * 0.7} ${size},${h} ${h * 1.3},${h * 1.3} ${h},${size} ${h * 0.7},${h * 1.3} 0,${h} ${h * 0.7},${h * 0.7}`} fill={colour} />}
      {shape === 'bar' && <rect x={1} y={h - 2} width={size - 2} height={4} fill={colour} stroke="#1d232b" strokeWidth={0.5} />}
    </svg>
  );
}

export function ClassBadge({ name, classes, className = '' }: { name: string; classes: readonly string[]; className?: string }) {
  return (
    <span className={`inline-flex items-center gap-1.5 rounded border border-slate-300 bg-white px-1.5 py-0.5 ${className}`}>
      <ClassShape index={classes.indexOf(name)} />
      <span>{name}</span>
    </span>
  );
}

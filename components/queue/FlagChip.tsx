/** Review reasons as chips: a symbol and words, with an Okabe–Ito colour as the third cue. */
const FLAGS: Record<string, { symbol: string; text: string; className: string }> = {
  'wrong-side': { symbol: '✕', text: 'wrong side', className: 'border-oi-vermilion text-[#8a3c00]' },
  'inside-margin': { symbol: '◐', text: 'inside the margin', className: 'border-oi-orange text-[#7a5400]' },
  'near-boundary': { symbol: '≈', text: 'near the boundary', className: 'border-oi-sky text-[#1f5f85]' },
  pivot: { symbol: '◆', text: 'pivot', className: 'border-oi-purple text-[#7d3a63]' },
  'held-out-wrong-side': { symbol: '⊘', text: 'wrong side when held out', className: 'border-oi-vermilion border-dashed text-[#8a3c00]' },
};

export function FlagChip({ flag }: { flag: string }) {
  const f = FLAGS[flag] ?? { symbol: '•', text: flag, className: 'border-slate-400 text-slate-700' };
  return (
    <span className={`inline-flex items-center gap-1 rounded-full border-2 bg-white px-2 py-0.5 text-xs font-medium ${f.className}`}>
      <span aria-hidden="true">{f.symbol}</span>
      {f.text}
    </span>
  );
}

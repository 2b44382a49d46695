import { DownloadCsv } from '@/components/charts/DownloadCsv';
import type { AgreementSummary } from '@/lib/server/revisions';
import { num, pct } from './format';

/** Kappa per reviewer pair, percent agreement, original-vs-current confusion, votes per day. */
export function AgreementSection({ a }: { a: AgreementSummary }) {
  const c = a.confusion;
  const maxCell = Math.max(1, ...c.counts.flat());
  return (
    <section aria-labelledby="agreement-heading" className="space-y-4">
      <h2 id="agreement-heading" className="text-lg font-semibold">
        Reviewer agreement
      </h2>
      <p className="text-sm" data-testid="overall-agreement">
        {a.overallPercent === null
          ? 'No queue item has votes from two reviewers yet.'
          : `Overall, reviewers agreed on ${pct(a.overallPercent)} of ${a.votePairs.toLocaleString('en-US')} pairs of votes on the same item.`}
      </p>
      <div className="grid gap-6 lg:grid-cols-2">
        <div className="space-y-2">
          <div className="flex items-center justify-between">
            <h3 className="font-semibold">Cohen&apos;s kappa per reviewer pair</h3>
            <DownloadCsv filename="kappa-pairs.csv" header={['reviewer a', 'reviewer b', 'shared items', 'percent agreement', 'kappa']} rows={a.pairs.map((p) => [p.a, p.b, p.items, p.percent, p.kappa])} />
          </div>
          {a.pairs.length === 0 ? (
            <p className="text-sm text-slate-700">No two reviewers have voted on the same item yet.</p>
          ) : (
            <table className="border-collapse text-sm">
              <thead>
                <tr className="border-b border-slate-300 text-left">
                  <th scope="col" className="py-1 pr-4">Pair</th>
                  <th scope="col" className="py-1 pr-4 text-right">Shared items</th>
                  <th scope="col" className="py-1 pr-4 text-right">Agreement</th>
                  <th scope="col" className="py-1 text-right">Kappa</th>
                </tr>
              </thead>
              <tbody>
                {a.pairs.map((p) => (
                  <tr key={`${p.a}|${p.b}`} className="border-b border-slate-200">
                    <th scope="row" className="py-1 pr-4 text-left font-normal">
                      {p.a} and {p.b}
                    </th>
                    <td className="py-1 pr-4 text-right tabular-nums">{p.items}</td>
                    <td className="py-1 pr-4 text-right tabular-nums">{pct(p.percent)}</td>
                    <td className="py-1 text-right tabular-nums">{num(p.kappa, 3)}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          )}
          <p className="text-xs text-slate-700">Kappa corrects the agreement for chance: 1 is perfect, 0 is what chance alone would give, below 0 worse than chance.</p>
        </div>
        <div className="space-y-2">
          <div className="flex items-center justify-between">
            <h3 className="font-semibold" id="confusion-heading">
              Imported label against current label
            </h3>
            <DownloadCsv filename="label-confusion.csv" header={['imported label', ...c.classes.map((x) => `now ${x}`)]} rows={c.classes.map((x, i) => [x, ...c.counts[i]])} />
          </div>
          <table className="border-collapse text-sm" aria-labelledby="confusion-heading" data-testid="confusion">
            <thead>
              <tr>
                <td />
                {c.classes.map((x) => (
                  <th key={x} scope="col" className="px-2 py-1 text-right font-semibold">
                    now {x}
                  </th>
                ))}
              </tr>
            </thead>
            <tbody>
              {c.classes.map((x, i) => (
                <tr key={x}>
                  <th scope="row" className="px-2 py-1 text-left font-semibold">
                    imported {x}
                  </th>
                  {c.counts[i].map((v, j) => (
                    <td
                      key={c.classes[j]}
                      className={`px-2 py-1 text-right tabular-nums ${i === j ? 'font-semibold' : ''}`}
                      style={{ background: v === 0 ? undefined : `rgba(0, 114, 178, ${(0.08 + 0.35 * (v / maxCell)).toFixed(3)})` }}
                    >
                      {v.toLocaleString('en-US')}
                    </td>
                  ))}
                </tr>
              ))}
            </tbody>
          </table>
          <p className="text-xs text-slate-700">
            {c.unchanged.toLocaleString('en-US')} of {c.total.toLocaleString('en-US')} samples keep their imported label (bold diagonal).
          </p>
        </div>
      </div>
      <div className="space-y-2">
        <div className="flex items-center justify-between">
          <h3 className="font-semibold">Votes per reviewer per day (UTC)</h3>
          <DownloadCsv filename="reviewer-throughput.csv" header={['day', 'reviewer', 'votes']} rows={a.throughput.map((t) => [t.day, t.reviewer, t.votes])} />
        </div>
        {a.throughput.length === 0 ? (
          <p className="text-sm text-slate-700">No votes yet.</p>
        ) : (
          <table className="border-collapse text-sm">
            <thead>
              <tr className="border-b border-slate-300 text-left">
                <th scope="col" className="py-1 pr-4">Day</th>
                {a.reviewers.map((r) => (
                  <th key={r} scope="col" className="py-1 pr-4 text-right">
                    {r}
                  </th>
                ))}
              </tr>
            </thead>
            <tbody>
              {a.days.map((d) => (
                <tr key={d} className="border-b border-slate-200">
                  <th scope="row" className="py-1 pr-4 text-left font-normal tabular-nums">{d}</th>
                  {a.reviewers.map((r) => {
                    const v = a.throughput.find((t) => t.day === d && t.reviewer === r)?.votes ?? 0;
                    return (
                      <td key={r} className="py-1 pr-4 text-right tabular-nums">
                        <span className="inline-flex items-center justify-end gap-2">
                          <span aria-hidden="true" className="inline-block h-2 bg-oi-blue" style={{ width: `${Math.min(120, v * 2)}px` }} />
                          {v}
                        </span>
                      </td>
                    );
                  })}
                </tr>
              ))}
            </tbody>
          </table>
        )}
      </div>
    </section>
  );
}

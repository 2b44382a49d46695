import Link from 'next/link';
import { DownloadCsv } from '@/components/charts/DownloadCsv';
import type { RevisionDiff } from '@/lib/server/revisions';

/** The diff picker (a plain GET form: works without JavaScript) and the changed samples. */
export function DiffSection({ projectId, numbers, diff }: { projectId: string; numbers: readonly number[]; diff: RevisionDiff | null }) {
  const select = (name: 'from' | 'to', value: number | undefined, label: string) => (
    <label className="flex items-center gap-2 text-sm">
      {label}
      <select name={name} defaultValue={value} className="rounded border border-slate-400 bg-white px-2 py-1">
        {numbers.map((n) => (
          <option key={n} value={n}>
            Revision {n}
          </option>
        ))}
      </select>
    </label>
  );
  const who = (e: RevisionDiff['entries'][number]): string => {
    const votes = e.votes.map((v) => `${v.by}: ${v.decision === 'relabel' ? `relabel to ${v.label ?? '?'}` : 'keep'}`);
    const parts = [...votes];
    if (e.tiebreakBy) parts.push(`tie broken by ${e.tiebreakBy}`);
    if (parts.length === 0) parts.push(e.recordedBy ? `recorded by ${e.recordedBy}` : 'import or update');
    return parts.join('; ');
  };
  return (
    <section aria-labelledby="diff-heading" className="space-y-3">
      <h2 id="diff-heading" className="text-lg font-semibold">
        Compare two revisions
      </h2>
      {numbers.length < 2 ? (
        <p className="text-sm text-slate-700">There is only one revision so far; a comparison needs two.</p>
      ) : (
        <form method="get" className="flex flex-wrap items-end gap-3" aria-label="Choose two revisions">
          {select('from', diff?.from ?? numbers[Math.max(0, numbers.length - 2)], 'From')}
          {select('to', diff?.to ?? numbers[numbers.length - 1], 'To')}
          <button type="submit" className="rounded bg-ink px-3 py-1 text-sm text-white">
            Compare
          </button>
        </form>
      )}
      {diff ? (
        <div className="space-y-2">
          <div className="flex items-center justify-between gap-2">
            <p className="text-sm" data-testid="diff-summary">
              {diff.total === 0
                ? `No sample has a different label in revision ${diff.to} than in revision ${diff.from}.`
                : `${diff.total.toLocaleString('en-US')} sample${diff.total === 1 ? '' : 's'} changed between revision ${diff.from} and revision ${diff.to}${diff.total > diff.entries.length ? ` (first ${diff.entries.length} shown)` : ''}.`}
            </p>
            {diff.total > 0 ? (
              <DownloadCsv
                filename={`changes-r${diff.from}-r${diff.to}.csv`}
                header={['sample', 'from', 'to', 'revisions', 'decided by']}
                rows={diff.entries.map((e) => [e.externalId, e.from, e.to, e.revisions.join(' '), who(e)])}
              />
            ) : null}
          </div>
          {diff.total > 0 ? (
            <div className="max-h-96 overflow-auto rounded border border-slate-300 bg-white" tabIndex={0} role="region" aria-label="Changed samples">
              <table className="min-w-full border-collapse text-sm">
                <thead className="sticky top-0 bg-slate-50">
                  <tr className="border-b border-slate-300 text-left">
                    <th scope="col" className="px-2 py-1">Sample</th>
                    <th scope="col" className="px-2 py-1">From</th>
                    <th scope="col" className="px-2 py-1">To</th>
                    <th scope="col" className="px-2 py-1">In revision</th>
                    <th scope="col" className="px-2 py-1">Who decided</th>
                  </tr>
                </thead>
                <tbody>
                  {diff.entries.map((e) => (
                    <tr key={e.sampleId} className="border-b border-slate-200">
                      <th scope="row" className="px-2 py-1 text-left font-normal">
                        <Link className="underline" href={`/projects/${projectId}/boundary?sample=${encodeURIComponent(e.sampleId)}`}>
                          {e.externalId}
                        </Link>
                      </th>
                      <td className="px-2 py-1">{e.from}</td>
                      <td className="px-2 py-1">→ {e.to}</td>
                      <td className="px-2 py-1 tabular-nums">{e.revisions.join(', ')}</td>
                      <td className="px-2 py-1">{who(e)}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
          ) : null}
        </div>
      ) : null}
    </section>
  );
}

import { DownloadCsv } from '@/components/charts/DownloadCsv';
import { ClassShape } from '@/components/queue/ClassBadge';
import type { RevisionRow } from '@/lib/server/revisions';
import { num, pct } from './format';

const HEAD = ['revision', 'boundary', 'margin width', 'hard margin', 'support vectors', 'wrong side', 'inside margin', 'hinge loss', 'out-of-fold accuracy', 'kernel', 'C', 'formulation', 'settings changed'] as const;

/** Every revision × boundary with the numbers of its fit; revisions without a fit say so. */
export function RevisionTable({ revisions, classes }: { revisions: readonly RevisionRow[]; classes: readonly string[] }) {
  const csv = revisions.flatMap((r) =>
    r.boundaries.length === 0
      ? [[r.number, '', null, 'no fit', null, null, null, null, null, null, null, null, '']]
      : r.boundaries.map((b) => [r.number, b.name, b.marginWidth, b.hardMargin, b.supportVectors, b.wrongSide, b.insideMargin, b.hingeLoss, b.oofAccuracy, r.fit?.settings.kernel ?? '', r.fit?.settings.C ?? null, r.fit?.settings.formulation ?? '', r.settingsChanged.join(' ')]),
  );
  return (
    <div className="space-y-2">
      <div className="flex items-center justify-between gap-2">
        <h3 className="font-semibold" id="revision-table-heading">
          Table of every revision and boundary
        </h3>
        <DownloadCsv filename="revisions.csv" header={[...HEAD]} rows={csv} />
      </div>
      <div className="overflow-x-auto rounded border border-slate-300 bg-white" tabIndex={0} role="region" aria-labelledby="revision-table-heading">
        <table className="min-w-full border-collapse text-sm" data-testid="revision-table">
          <thead>
            <tr className="border-b border-slate-300 bg-slate-50 text-left">
              <th scope="col" className="px-2 py-1">Revision</th>
              <th scope="col" className="px-2 py-1">Boundary</th>
              <th scope="col" className="px-2 py-1 text-right">Margin width</th>
              <th scope="col" className="px-2 py-1">Hard margin</th>
              <th scope="col" className="px-2 py-1 text-right">Support vectors</th>
              <th scope="col" className="px-2 py-1 text-right">Wrong side</th>
              <th scope="col" className="px-2 py-1 text-right">Inside margin</th>
              <th scope="col" className="px-2 py-1 text-right">Hinge loss</th>
              <th scope="col" className="px-2 py-1 text-right">Out-of-fold accuracy</th>
              <th scope="col" className="px-2 py-1">Fit settings</th>
            </tr>
          </thead>
          <tbody>
            {revisions.map((r) => {
              const changed = r.settingsChanged.length > 0;
              const settings = r.fit ? `${r.fit.settings.kernel}, C ${num(r.fit.settings.C)}${r.fit.settings.gamma !== null ? `, γ ${num(r.fit.settings.gamma)}` : ''}, ${r.fit.settings.scale}` : '';
              if (r.boundaries.length === 0) {
                return (
                  <tr key={r.number} className="border-b border-slate-200">
                    <th scope="row" className="px-2 py-1 text-left font-normal">{r.number}</th>
                    <td colSpan={9} className="px-2 py-1 text-slate-700">
                      No completed fit for revision {r.number} ({r.changeCount.toLocaleString('en-US')} label changes).
                    </td>
                  </tr>
                );
              }
              return r.boundaries.map((b, k) => (
                <tr key={`${r.number}-${b.name}`} className={`border-b border-slate-200 ${changed && k === 0 ? 'border-t-2 border-t-ink' : ''}`} data-revision={r.number} data-boundary={b.name}>
                  <th scope="row" className="px-2 py-1 text-left font-normal">{r.number}</th>
                  <td className="px-2 py-1">
                    <span className="inline-flex items-center gap-1">
                      <ClassShape index={classes.indexOf(b.positive)} /> {b.name}
                    </span>
                  </td>
                  <td className="px-2 py-1 text-right tabular-nums" data-testid="margin-width" data-value={b.marginWidth ?? ''}>
                    {num(b.marginWidth, 5)}
                  </td>
                  <td className="px-2 py-1">{b.hardMargin}</td>
                  <td className="px-2 py-1 text-right tabular-nums">{num(b.supportVectors)}</td>
                  <td className="px-2 py-1 text-right tabular-nums">{num(b.wrongSide)}</td>
                  <td className="px-2 py-1 text-right tabular-nums">{num(b.insideMargin)}</td>
                  <td className="px-2 py-1 text-right tabular-nums">{num(b.hingeLoss, 5)}</td>
                  <td className="px-2 py-1 text-right tabular-nums">{pct(b.oofAccuracy)}</td>
                  <td className="px-2 py-1">
                    {settings}
                    {changed && k === 0 ? (
                      <strong className="block text-xs">Settings changed ({r.settingsChanged.join(', ')}): margins across this mark are not comparable.</strong>
                    ) : null}
                  </td>
                </tr>
              ));
            })}
          </tbody>
        </table>
      </div>
    </div>
  );
}

import type { ImportHistoryItem } from '@/lib/server/data-view';

const when = (iso: string) => `${new Date(iso).toLocaleString('en-GB', { dateStyle: 'medium', timeStyle: 'short', timeZone: 'UTC' })} UTC`;

/** The project's import history, newest first (server-rendered; refreshed after each import). */
export function ImportHistory({ items }: { items: ImportHistoryItem[] }) {
  return (
    <section aria-labelledby="history-heading" className="space-y-2">
      <h2 id="history-heading" className="text-lg font-semibold">
        Import history
      </h2>
      {items.length === 0 ? (
        <p className="text-sm text-slate-600">Nothing has been imported into this project yet.</p>
      ) : (
        <div className="overflow-x-auto">
          <table className="w-full border-collapse text-sm">
            <thead>
              <tr className="border-b border-slate-300 text-left">
                <th scope="col" className="py-2 pr-4 font-semibold">When</th>
                <th scope="col" className="py-2 pr-4 font-semibold">File</th>
                <th scope="col" className="py-2 pr-4 font-semibold">Mode</th>
                <th scope="col" className="py-2 pr-4 text-right font-semibold">Rows</th>
                <th scope="col" className="py-2 pr-4 font-semibold">Result</th>
                <th scope="col" className="py-2 pr-4 font-semibold">By</th>
              </tr>
            </thead>
            <tbody>
              {items.map((b) => (
                <tr key={b.id} className="border-b border-slate-200 align-top">
                  <td className="py-2 pr-4 whitespace-nowrap">{when(b.createdAt)}</td>
                  <td className="py-2 pr-4">
                    <span className="break-all">{b.fileName}</span>{' '}
                    <span className="text-slate-600">({b.format === 'jsonl' ? 'JSON Lines' : b.format === 'csv' ? 'CSV' : 'unrecognised'})</span>
                  </td>
                  <td className="py-2 pr-4">{b.mode === 'update' ? 'add or update' : 'add'}</td>
                  <td className="py-2 pr-4 text-right tabular-nums">{b.rowCount.toLocaleString('en-US')}</td>
                  <td className="py-2 pr-4">
                    {b.status === 'applied' ? (
                      <span>
                        <span aria-hidden="true" className="text-oi-green">
                          ●{' '}
                        </span>
                        Applied{b.revisionNumber === null ? ' (no changes)' : ` as revision ${b.revisionNumber}`}
                      </span>
                    ) : b.status === 'failed' ? (
                      <span>
                        <span aria-hidden="true" className="text-oi-vermilion">
                          ▲{' '}
                        </span>
                        Refused: <span className="text-slate-700">{b.error ?? 'no detail recorded'}</span>
                      </span>
                    ) : (
                      <span>In progress</span>
                    )}
                  </td>
                  <td className="py-2 pr-4">{b.createdBy ?? 'pipeline'}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </section>
  );
}

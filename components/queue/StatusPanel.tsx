import type { QueueBoard } from '@/lib/server/queue/view';

/** Fit status, queue progress by state (bar + numbers), and who is reviewing now. */
export function StatusPanel({ board }: { board: QueueBoard }) {
  const { status } = board;
  const c = status.counts;
  const total = c.open + c.oneVote + c.split + c.closed;
  const segments = [
    { key: 'closed', label: 'Closed', value: c.closed, className: 'bg-oi-green', pattern: '' },
    { key: 'split', label: 'Split, for a lead', value: c.split, className: 'bg-oi-vermilion', pattern: '' },
    { key: 'one-vote', label: 'Awaiting a second vote', value: c.oneVote, className: 'bg-oi-orange', pattern: '' },
    { key: 'open', label: 'Open', value: c.open, className: 'bg-slate-200', pattern: '' },
  ];
  return (
    <section aria-label="Fit and queue status" className="grid gap-3 rounded border border-slate-300 bg-white p-3 text-sm md:grid-cols-3">
      <div data-testid="fit-status" aria-live="polite">
        <FitLine board={board} />
      </div>
      <div className="space-y-1">
        <div className="flex h-3 w-full overflow-hidden rounded border border-slate-400" aria-hidden="true">
          {total > 0 &&
            segments.map((s) =>
              s.value > 0 ? <div key={s.key} className={`${s.className} border-r border-white last:border-r-0`} style={{ width: `${(100 * s.value) / total}%` }} /> : null,
            )}
        </div>
        <p data-testid="queue-progress">
          <span className="font-medium">Queue:</span> open {c.open} · awaiting a second vote {c.oneVote} · split {c.split} · closed {c.closed} (kept {c.kept},
          relabelled {c.relabelled})
          {c.pending > 0 ? ` · ${c.pending} relabel${c.pending === 1 ? '' : 's'} pending apply` : ''}
        </p>
      </div>
      <div>
        <p data-testid="reviewing-now">
          <span className="font-medium">Reviewing now:</span>{' '}
          {status.reviewing.length === 0 ? 'nobody' : status.reviewing.map((r) => r.name).join(', ')}
        </p>
        <p className="text-xs text-slate-600">
          Revision {status.currentRevision}
          {status.applyEvery > 0
            ? ` · agreed relabels are applied automatically every ${status.applyEvery}`
            : ' · agreed relabels are applied when a lead says so'}
        </p>
      </div>
    </section>
  );
}

function FitLine({ board }: { board: QueueBoard }) {
  const { working, current, currentRevision } = board.status;
  if (working && working.status === 'running') {
    return (
      <div className="space-y-1">
        <p>
          <span aria-hidden="true">⟳ </span>
          Fitting revision {working.revisionNumber}… {Math.round(working.progress * 100)} %
        </p>
        <progress className="h-2 w-full" max={1} value={working.progress} aria-label={`Fit of revision ${working.revisionNumber}`} />
      </div>
    );
  }
  if (working) {
    return (
      <p>
        <span aria-hidden="true">⏳ </span>Revision {working.revisionNumber} waits for its fit…
      </p>
    );
  }
  if (!current) return <p>No fit yet.</p>;
  return (
    <p>
      <span aria-hidden="true">✓ </span>
      Standings from the fit of revision {current.revisionNumber}
      {current.progress < 1 ? ' (storing standings…)' : ''}
      {current.revisionNumber < currentRevision ? ` — revision ${currentRevision} is not fitted yet` : ''}
    </p>
  );
}

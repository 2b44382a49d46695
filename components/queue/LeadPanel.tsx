'use client';

import { useState } from 'react';
import type { QueueBoard } from '@/lib/server/queue/view';
import { ClassBadge } from './ClassBadge';

type Choice = { decision: 'keep' } | { decision: 'relabel'; label: string };

/** For leads: split items to decide (with both votes) and the pending changes with "apply now". */
export function LeadPanel({
  board,
  classes,
  onDecide,
  onApply,
}: {
  board: QueueBoard;
  classes: string[];
  onDecide: (itemId: string, choice: Choice) => Promise<void>;
  onApply: () => Promise<void>;
}) {
  const [busy, setBusy] = useState(false);
  if (!board.lead) return null;
  const { splits, pending } = board.lead;
  const run = async (fn: () => Promise<void>) => {
    setBusy(true);
    try {
      await fn();
    } finally {
      setBusy(false);
    }
  };
  return (
    <div className="grid gap-5 lg:grid-cols-2">
      <section aria-labelledby="splits-heading" className="space-y-2 rounded border border-slate-300 bg-white p-4">
        <h2 id="splits-heading" className="font-semibold">
          Split items to decide ({splits.length})
        </h2>
        {splits.length === 0 && <p className="text-sm text-slate-700">No split items.</p>}
        <ul className="space-y-3">
          {splits.map((s) => (
            <li key={s.itemId} className="space-y-2 border-t border-slate-200 pt-2 text-sm" data-testid={`split-${s.sample.externalId}`}>
              <p>
                <span className="font-mono">{s.sample.externalId}</span> · now <ClassBadge name={s.sample.currentLabel} classes={classes} />
              </p>
              {s.sample.text && <p className="text-slate-800">{s.sample.text}</p>}
              {s.standing && <p className="text-slate-700">{s.standing.headline}</p>}
              <ul className="space-y-0.5">
                {s.votes.map((v) => (
                  <li key={v.userId}>
                    {v.name}: {v.decision === 'keep' ? 'keep' : `relabel to ${v.label ?? ''}`}
                    {v.note ? <span className="text-slate-600"> — “{v.note}”</span> : null}
                  </li>
                ))}
              </ul>
              {s.callerVoted ? (
                <p className="text-slate-700">You cast one of these votes, so another lead decides this item.</p>
              ) : (
                <div className="flex flex-wrap gap-2" role="group" aria-label={`Decide ${s.sample.externalId}`}>
                  <button type="button" disabled={busy} onClick={() => void run(() => onDecide(s.itemId, { decision: 'keep' }))} className="rounded border-2 border-oi-green px-2 py-1">
                    Keep {s.sample.currentLabel}
                  </button>
                  {classes
                    .filter((c) => c !== s.sample.currentLabel)
                    .map((c) => (
                      <button
                        key={c}
                        type="button"
                        disabled={busy}
                        onClick={() => void run(() => onDecide(s.itemId, { decision: 'relabel', label: c }))}
                        className="rounded border border-slate-400 px-2 py-1"
                        aria-label={`Decide: relabel ${s.sample.externalId} to ${c}`}
                      >
                        → {c}
                      </button>
                    ))}
                </div>
              )}
            </li>
          ))}
        </ul>
      </section>
      <section aria-labelledby="pending-heading" className="space-y-2 rounded border border-slate-300 bg-white p-4">
        <div className="flex items-center justify-between">
          <h2 id="pending-heading" className="font-semibold">
            Pending changes ({pending.length})
          </h2>
          <button
            type="button"
            disabled={busy || pending.length === 0}
            onClick={() => void run(onApply)}
            className="rounded bg-oi-blue px-3 py-1.5 text-sm font-medium text-white disabled:opacity-50"
          >
            Apply now
          </button>
        </div>
        <p className="text-xs text-slate-600">
          Agreed relabels not yet in a revision.{' '}
          {board.status.applyEvery > 0 ? `They are applied automatically once ${board.status.applyEvery} are pending.` : 'Only a lead applies them.'} Applying makes
          revision {board.status.currentRevision + 1} and starts a refit.
        </p>
        {pending.length === 0 && <p className="text-sm text-slate-700">Nothing pending.</p>}
        <ul className="space-y-1 text-sm">
          {pending.map((p) => (
            <li key={p.itemId} className="flex flex-wrap items-center gap-2" data-testid={`pending-${p.externalId}`}>
              <span className="font-mono">{p.externalId}</span>
              <ClassBadge name={p.fromLabel} classes={classes} /> <span aria-hidden="true">→</span>
              <span className="sr-only">to</span>
              <ClassBadge name={p.toLabel} classes={classes} />
              {p.decidedBy === 'lead' && <span className="text-xs text-slate-600">(lead decision)</span>}
            </li>
          ))}
        </ul>
      </section>
    </div>
  );
}

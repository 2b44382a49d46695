'use client';

import { useCallback, useEffect, useRef, useState } from 'react';
import { applyChanges } from '@/app/actions/apply-changes';
import { castVote } from '@/app/actions/cast-vote';
import { claimNextItem } from '@/app/actions/claim-next-item';
import { decideSplit } from '@/app/actions/decide-split';
import { withdrawVote } from '@/app/actions/withdraw-vote';
import type { ActionResult } from '@/lib/domain';
import type { QueueBoard, ReviewItemView } from '@/lib/server/queue/view';
import { ClassBadge } from './ClassBadge';
import { FlagChip } from './FlagChip';
import { actionForKey, KEY_BINDINGS } from './keymap';
import { PositionStrip } from './PositionStrip';
import { StatusPanel } from './StatusPanel';
import { LeadPanel } from './LeadPanel';

type Choice = { decision: 'keep' } | { decision: 'relabel'; label: string };

interface Toast {
  readonly text: string;
  readonly voteId: string | null;
  readonly until: number | null;
}

const LEASE_RENEW_MS = 60_000;
/**
 * Follow-up requests for an item's nearest samples when the first answer came without them: after
 * 0.4 s, then 1.5× longer each time up to 4 s, 14 times (about 40 s in all) — long enough for a
 * server that has just started to read a large project's feature matrix (about 12 s for
 * 100,000 × 256).
 */
const NEIGHBOUR_RETRY_MS = 400;
const NEIGHBOUR_RETRY_MAX_MS = 4000;
const NEIGHBOUR_TRIES = 14;

function imageUrl(projectId: string, ref: string): string | null {
  if (/^https?:\/\//i.test(ref)) return ref;
  if (ref.startsWith('upload:')) return `/api/projects/${encodeURIComponent(projectId)}/images/${ref.slice('upload:'.length).split('/').map(encodeURIComponent).join('/')}`;
  return null;
}

export function QueueScreen({
  projectId,
  role,
  classes,
  initialBoard,
}: {
  projectId: string;
  role: 'lead' | 'reviewer' | 'observer';
  classes: string[];
  initialBoard: QueueBoard;
}) {
  const canVote = role !== 'observer';
  const [item, setItem] = useState<ReviewItemView | null | undefined>(canVote ? undefined : null);
  const [board, setBoard] = useState<QueueBoard>(initialBoard);
  const [note, setNote] = useState('');
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<string | null>(null);
  const [toast, setToast] = useState<Toast | null>(null);
  const [now, setNow] = useState(() => Date.now());
  const [help, setHelp] = useState(false);
  const noteRef = useRef<HTMLTextAreaElement>(null);
  const itemRef = useRef<ReviewItemView | null | undefined>(item);
  itemRef.current = item;

  const refreshBoard = useCallback(async () => {
    try {
      const res = await fetch(`/api/projects/${encodeURIComponent(projectId)}/status`, { cache: 'no-store' });
      if (res.ok) setBoard((await res.json()) as QueueBoard);
    } catch {
      // keep the last board; the next poll tries again
    }
  }, [projectId]);

  const next = useCallback(
    async (skipItemId?: string) => {
      if (!canVote) return;
      setBusy(true);
      const r = await claimNextItem({ projectId, ...(skipItemId ? { skipItemId } : {}) });
      setBusy(false);
      if (!r.ok) {
        setError(r.error);
        return;
      }
      setError(null);
      const current = itemRef.current;
      if (!(current && r.data.item && current.itemId === r.data.item.itemId)) setNote('');
      setItem(r.data.item);
      void refreshBoard();
    },
    [canVote, projectId, refreshBoard],
  );

  useEffect(() => {
    void next();
  }, [next]);

  // Poll the board; faster while a fit is being computed.
  const fitting = board.status.working !== null;
  useEffect(() => {
    const id = setInterval(() => void refreshBoard(), fitting ? 1500 : 4000);
    return () => clearInterval(id);
  }, [refreshBoard, fitting]);

  // With nothing on screen, look again whenever the queue changes (a fit finished, items opened).
  const emptyKey = `${board.status.current?.id ?? ''}:${board.status.counts.open}:${board.status.counts.oneVote}`;
  const lastEmptyKey = useRef<string | null>(null);
  useEffect(() => {
    if (item !== null || !canVote || busy) return;
    if (lastEmptyKey.current === null) {
      lastEmptyKey.current = emptyKey;
      return;
    }
    if (lastEmptyKey.current === emptyKey) return;
    lastEmptyKey.current = emptyKey;
    void next();
  }, [item, canVote, busy, emptyKey, next]);

  // An item shown before its fit's standings were stored: fetch it again once they are.
  const fitKey = `${board.status.current?.id ?? ''}:${board.status.current?.progress ?? 0}`;
  const standingMissing = item !== undefined && item !== null && item.standing === null;
  const lastFitKey = useRef(fitKey);
  useEffect(() => {
    if (lastFitKey.current === fitKey) return;
    lastFitKey.current = fitKey;
    if (standingMissing && !busy) void next();
  }, [fitKey, standingMissing, busy, next]);

  // An item answered before its nearest samples were found (the server does not keep a reviewer
  // waiting for them): ask for it again shortly; the search has gone on and its result is cached.
  const neighboursMissing = item !== undefined && item !== null && item.neighbours === null;
  const neighbourTries = useRef<{ itemId: string; tries: number }>({ itemId: '', tries: 0 });
  useEffect(() => {
    if (!neighboursMissing || !item || busy) return;
    const t = neighbourTries.current;
    if (t.itemId !== item.itemId) neighbourTries.current = { itemId: item.itemId, tries: 0 };
    if (neighbourTries.current.tries >= NEIGHBOUR_TRIES) return;
    const delay = Math.min(NEIGHBOUR_RETRY_MAX_MS, NEIGHBOUR_RETRY_MS * 1.5 ** neighbourTries.current.tries);
    neighbourTries.current.tries++;
    const id = setTimeout(() => void next(), delay);
    return () => clearTimeout(id);
  }, [neighboursMissing, item, busy, next]);

  // Keep the lease alive while an item is on screen.
  useEffect(() => {
    if (!item) return;
    const id = setInterval(() => void next(), LEASE_RENEW_MS);
    return () => clearInterval(id);
  }, [item, next]);

  // Undo countdown.
  useEffect(() => {
    if (!toast?.until) return;
    const id = setInterval(() => setNow(Date.now()), 250);
    return () => clearInterval(id);
  }, [toast]);

  const undoOpen = toast?.voteId && toast.until !== null && toast.until > now;

  const vote = useCallback(
    async (choice: Choice) => {
      const current = itemRef.current;
      if (!current || busy) return;
      setBusy(true);
      const r = await castVote({ projectId, itemId: current.itemId, ...choice, ...(note.trim() ? { note: note.trim() } : {}) });
      setBusy(false);
      if (!r.ok) {
        setError(r.error);
        if (r.status === 409 || r.status === 404) void next();
        return;
      }
      setError(null);
      const what = choice.decision === 'keep' ? `keep ${current.sample.currentLabel}` : `relabel to ${choice.label}`;
      const result =
        r.data.result === 'closed'
          ? ' — the item is closed'
          : r.data.result === 'split'
            ? ' — the votes disagree; a lead will decide'
            : '';
      const applied = r.data.applied ? ` · applied in revision ${r.data.applied.revisionNumber}` : '';
      setToast({
        text: `Vote recorded on ${current.sample.externalId}: ${what}${result}${applied}.`,
        voteId: r.data.undoUntil ? r.data.voteId : null,
        until: r.data.undoUntil ? Date.parse(r.data.undoUntil) : null,
      });
      setNow(Date.now());
      setNote('');
      await next();
    },
    [busy, next, note, projectId],
  );

  const undo = useCallback(async () => {
    if (!toast?.voteId || !undoOpen) return;
    setBusy(true);
    const r = await withdrawVote({ projectId, voteId: toast.voteId });
    setBusy(false);
    if (!r.ok) {
      setError(r.error);
      setToast({ ...toast, voteId: null, until: null });
      return;
    }
    setToast({ text: 'Vote withdrawn. The item is back on your screen.', voteId: null, until: null });
    await next();
  }, [next, projectId, toast, undoOpen]);

  const skip = useCallback(async () => {
    const current = itemRef.current;
    if (!current) return;
    await next(current.itemId);
  }, [next]);

  useEffect(() => {
    const onKey = (e: KeyboardEvent) => {
      if (e.ctrlKey || e.metaKey || e.altKey) return;
      const target = e.target as HTMLElement | null;
      const typing = target && (target.tagName === 'TEXTAREA' || target.tagName === 'INPUT' || target.tagName === 'SELECT' || target.isContentEditable);
      const hit = actionForKey(e.key);
      if (!hit) return;
      if (typing) {
        if (hit.action === 'close') {
          e.preventDefault();
          target?.blur();
        }
        return;
      }
      if (help && hit.action !== 'help' && hit.action !== 'close') return;
      const current = itemRef.current;
      switch (hit.action) {
        case 'help':
          e.preventDefault();
          setHelp((h) => !h);
          return;
        case 'close':
          setHelp(false);
          return;
        case 'note':
          if (current) {
            e.preventDefault();
            noteRef.current?.focus();
          }
          return;
        case 'undo':
          e.preventDefault();
          void undo();
          return;
        case 'skip':
          e.preventDefault();
          void skip();
          return;
        case 'keep':
          e.preventDefault();
          if (current) void vote({ decision: 'keep' });
          return;
        case 'relabel': {
          if (!current || hit.classNumber === undefined) return;
          const label = current.classes[hit.classNumber - 1];
          if (label === undefined) return;
          e.preventDefault();
          void vote(label === current.sample.currentLabel ? { decision: 'keep' } : { decision: 'relabel', label });
          return;
        }
      }
    };
    window.addEventListener('keydown', onKey);
    return () => window.removeEventListener('keydown', onKey);
  }, [help, skip, undo, vote]);

  const decide = useCallback(
    async (itemId: string, choice: Choice) => {
      const r: ActionResult<unknown> = await decideSplit({ projectId, itemId, ...choice });
      if (!r.ok) setError(r.error);
      else setError(null);
      await refreshBoard();
    },
    [projectId, refreshBoard],
  );

  const applyNow = useCallback(async () => {
    const r = await applyChanges({ projectId });
    if (!r.ok) setError(r.error);
    else {
      setError(null);
      setToast({ text: r.data ? `Applied ${r.data.changeCount} relabels as revision ${r.data.revisionNumber}; a refit has started.` : 'Nothing was pending.', voteId: null, until: null });
    }
    await refreshBoard();
  }, [projectId, refreshBoard]);

  return (
    <div className="space-y-5">
      <StatusPanel board={board} />

      {error && (
        <p role="alert" className="rounded border-2 border-oi-vermilion bg-white px-3 py-2 text-sm">
          <span aria-hidden="true">⚠ </span>
          {error}
        </p>
      )}

      <div className="grid gap-5 lg:grid-cols-[minmax(0,1fr)_20rem]">
        <section aria-labelledby="item-heading" className="space-y-4">
          <div className="flex items-center justify-between">
            <h2 id="item-heading" className="text-lg font-semibold">
              {canVote ? 'Your item' : 'Queue'}
            </h2>
            <button type="button" onClick={() => setHelp((h) => !h)} className="rounded border border-slate-400 bg-white px-2 py-1 text-sm" aria-expanded={help} aria-controls="key-help">
              <kbd className="font-mono">?</kbd> Keys
            </button>
          </div>
          {help && <KeyHelp />}
          {!canVote && <p className="text-sm text-slate-700">Observers can follow the queue here but cannot vote.</p>}
          {canVote && item === undefined && <p className="text-sm text-slate-700">Finding your next item…</p>}
          {canVote && item === null && (
            <div className="rounded border border-slate-300 bg-white p-4">
              <p className="font-medium">Nothing is waiting for your vote right now.</p>
              <p className="text-sm text-slate-700">Items you voted on wait for a second reviewer; new items arrive after each refit.</p>
              <button type="button" onClick={() => void next()} className="mt-3 rounded bg-oi-blue px-3 py-1.5 text-sm font-medium text-white">
                Check again
              </button>
            </div>
          )}
          {item && <ItemCard projectId={projectId} item={item} />}
        </section>

        {canVote && item && (
          <aside aria-labelledby="vote-heading" className="space-y-3 self-start rounded border border-slate-300 bg-white p-4 lg:sticky lg:top-4">
            <h2 id="vote-heading" className="font-semibold">
              Your vote
            </h2>
            <p className="text-xs text-slate-600">The other reviewer&apos;s vote stays hidden until the item closes.</p>
            <button
              type="button"
              disabled={busy}
              onClick={() => void vote({ decision: 'keep' })}
              className="flex w-full items-center justify-between rounded border-2 border-oi-green bg-white px-3 py-2 text-left font-medium disabled:opacity-50"
            >
              <span>
                Keep <span className="font-normal">({item.sample.currentLabel})</span>
              </span>
              <kbd className="rounded border border-slate-400 px-1.5 font-mono text-xs">K</kbd>
            </button>
            <div role="group" aria-label="Relabel to" className="space-y-1.5">
              <p className="text-sm font-medium">Relabel to</p>
              {item.classes.map((c, i) =>
                c === item.sample.currentLabel ? null : (
                  <button
                    key={c}
                    type="button"
                    disabled={busy}
                    aria-label={`Relabel to ${c}`}
                    onClick={() => void vote({ decision: 'relabel', label: c })}
                    className="flex w-full items-center justify-between rounded border border-slate-400 bg-white px-3 py-1.5 text-left text-sm disabled:opacity-50"
                  >
                    <ClassBadge name={c} classes={item.classes} className="border-0 px-0" />
                    {i < 9 && <kbd className="rounded border border-slate-400 px-1.5 font-mono text-xs">{i + 1}</kbd>}
                  </button>
                ),
              )}
            </div>
            <label className="block text-sm">
              <span className="flex items-center justify-between font-medium">
                Note (optional) <kbd className="rounded border border-slate-400 px-1.5 font-mono text-xs">N</kbd>
              </span>
              <textarea
                ref={noteRef}
                value={note}
                onChange={(e) => setNote(e.target.value)}
                maxLength={500}
                rows={2}
                className="mt-1 w-full rounded border border-slate-400 p-1.5 text-sm"
              />
            </label>
            <button type="button" disabled={busy} onClick={() => void skip()} className="flex w-full items-center justify-between rounded border border-slate-300 px-3 py-1.5 text-sm">
              Skip this item <kbd className="rounded border border-slate-400 px-1.5 font-mono text-xs">S</kbd>
            </button>
          </aside>
        )}
      </div>

      {board.lead && <LeadPanel board={board} classes={classes} onDecide={decide} onApply={applyNow} />}

      <RecentDecisions board={board} classes={classes} />

      {toast && (
        <div role="status" aria-live="polite" className="fixed inset-x-0 bottom-4 mx-auto flex w-fit max-w-[90vw] items-center gap-3 rounded border border-slate-400 bg-white px-4 py-2 text-sm shadow-lg">
          <span>{toast.text}</span>
          {undoOpen && toast.until !== null && (
            <button type="button" onClick={() => void undo()} className="rounded bg-oi-blue px-2 py-1 font-medium text-white">
              Undo <kbd className="font-mono">U</kbd> · {Math.max(0, Math.ceil((toast.until - now) / 1000))} s
            </button>
          )}
          <button type="button" aria-label="Dismiss" onClick={() => setToast(null)} className="px-1 text-slate-600">
            ×
          </button>
        </div>
      )}
    </div>
  );
}

function KeyHelp() {
  return (
    <div id="key-help" role="region" aria-label="Keyboard keys" className="rounded border border-oi-blue bg-white p-4">
      <h3 className="mb-2 font-semibold">Keys on this screen</h3>
      <table className="text-sm">
        <tbody>
          {KEY_BINDINGS.map((b) => (
            <tr key={b.keys}>
              <th scope="row" className="py-0.5 pr-4 text-left align-top">
                <kbd className="rounded border border-slate-400 px-1.5 font-mono text-xs">{b.keys}</kbd>
              </th>
              <td className="py-0.5">{b.description}</td>
            </tr>
          ))}
        </tbody>
      </table>
      <p className="mt-2 text-xs text-slate-600">
        Undo window: a vote can be withdrawn for 10 seconds after it is cast, until a second vote or a lead&apos;s decision builds on it, and — for
        the vote that closes a relabel — until the relabel is applied to a revision.
      </p>
    </div>
  );
}

function ItemCard({ projectId, item }: { projectId: string; item: ReviewItemView }) {
  const img = item.sample.imageRef ? imageUrl(projectId, item.sample.imageRef) : null;
  const s = item.standing;
  return (
    <article className="space-y-4 rounded border border-slate-300 bg-white p-4" aria-label={`Sample ${item.sample.externalId}`}>
      <header className="flex flex-wrap items-center gap-3">
        <span className="font-mono text-sm" data-testid="item-external-id">
          {item.sample.externalId}
        </span>
        <span className="text-sm">
          Current label: <ClassBadge name={item.sample.currentLabel} classes={item.classes} />
        </span>
        {item.round > 1 && <span className="text-xs text-slate-600">review round {item.round}</span>}
        <span className="flex flex-wrap gap-1">
          {item.reasons.map((r) => (
            <FlagChip key={r} flag={r} />
          ))}
        </span>
      </header>
      {item.sample.text && <p className="whitespace-pre-wrap text-lg leading-relaxed">{item.sample.text}</p>}
      {img && (
        // eslint-disable-next-line @next/next/no-img-element
        <img src={img} alt={`Image of sample ${item.sample.externalId}`} className="max-h-72 rounded border border-slate-200" />
      )}
      {item.sample.metadata.length > 0 && (
        <dl className="grid grid-cols-[auto_1fr] gap-x-4 gap-y-0.5 text-sm">
          {item.sample.metadata.map(([k, v]) => (
            <div key={k} className="contents">
              <dt className="text-slate-600">{k}</dt>
              <dd>{v}</dd>
            </div>
          ))}
        </dl>
      )}
      <section aria-label="Standing" className="space-y-2 border-t border-slate-200 pt-3">
        {s ? (
          <>
            <p className="font-medium" data-testid="standing-headline">
              {s.headline}
            </p>
            <ul className="list-inside list-disc text-sm text-slate-700">
              {s.details.map((d) => (
                <li key={d}>{d}</li>
              ))}
            </ul>
            <PositionStrip position={s.position} heldOut={s.heldOutPosition} own={item.sample.currentLabel} rival={s.rival} nearBand={s.nearBand} />
            <p className="text-xs text-slate-600">
              From the fit of revision {s.fitRevision} · suspicion {s.suspicion.toFixed(2)}
            </p>
          </>
        ) : (
          <p className="text-sm text-slate-700">No standing stored for this sample yet (its fit is still being written).</p>
        )}
      </section>
      <section aria-labelledby="neighbours-heading" className="space-y-1 border-t border-slate-200 pt-3">
        <h3 id="neighbours-heading" className="text-sm font-semibold">
          Five nearest samples in feature space
        </h3>
        {item.neighbours === null && (
          <p className="text-sm text-slate-700" role="status">
            Finding the nearest samples…
          </p>
        )}
        <ol className="space-y-1 text-sm">
          {(item.neighbours ?? []).map((n) => (
            <li key={n.sampleId} className="flex flex-wrap items-baseline gap-2">
              <ClassBadge name={n.label} classes={item.classes} className="text-xs" />
              <span className="font-mono text-xs text-slate-600">{n.externalId}</span>
              <span className="text-xs text-slate-600">distance {n.distance.toFixed(3)}</span>
              {n.text && <span className="min-w-0 flex-1 truncate text-slate-800">{n.text}</span>}
            </li>
          ))}
        </ol>
      </section>
    </article>
  );
}

function RecentDecisions({ board, classes }: { board: QueueBoard; classes: string[] }) {
  if (board.recent.length === 0) return null;
  return (
    <section aria-labelledby="recent-heading" className="space-y-2" data-testid="recent-decisions">
      <h2 id="recent-heading" className="text-lg font-semibold">
        Recently closed
      </h2>
      <ul className="space-y-2">
        {board.recent.map((d) => (
          <li key={d.itemId} className="rounded border border-slate-300 bg-white px-3 py-2 text-sm" data-testid={`decision-${d.externalId}`}>
            <div className="flex flex-wrap items-center gap-2">
              <span className="font-mono">{d.externalId}</span>
              {d.outcome === 'relabelled' ? (
                <span>
                  <span aria-hidden="true">↻ </span>relabelled to <ClassBadge name={d.finalLabel ?? d.currentLabel} classes={classes} />
                  {d.appliedRevision !== null ? ` · applied in revision ${d.appliedRevision}` : ' · pending apply'}
                </span>
              ) : (
                <span>
                  <span aria-hidden="true">✓ </span>kept as <ClassBadge name={d.currentLabel} classes={classes} />
                </span>
              )}
              {d.byLead && <span className="text-xs text-slate-600">(decided by a lead)</span>}
            </div>
            {d.standing && (
              <p className="mt-1 text-slate-700" data-testid="decision-standing">
                Now: {d.standing.headline} <span className="text-xs text-slate-500">(fit of revision {d.standing.fitRevision})</span>
              </p>
            )}
          </li>
        ))}
      </ul>
    </section>
  );
}

'use client';

import { useEffect, useState } from 'react';
import { buttonClass } from '@/components/form-parts';

/**
 * The notice of the error boundaries (app/error.tsx for pages, app/global-error.tsx for the root
 * layout): what failed, a Try again button, the digest that matches the server log. Never a
 * stack trace.
 *
 * In production a server component's error reaches the browser without its message (only a
 * digest that matches the server log), so the boundary cannot read whether the database was the
 * cause. It asks /api/ready instead: a 503 with reason "database" means the database is not
 * answering and the page says so; anything else gets the generic message.
 */

export const PAGE_MESSAGES = {
  checking: 'This page could not be shown.',
  outage: 'The database is not answering right now, so this page could not be shown. Nothing was lost; try again in a moment.',
  fault: 'Something went wrong on our side and this page could not be shown. Try again in a moment.',
} as const;

export type Verdict = keyof typeof PAGE_MESSAGES;

/** What a readiness answer says about a failed page: only a database-down 503 is an outage. */
export async function verdictFromReadiness(res: Pick<Response, 'status' | 'json'>): Promise<Exclude<Verdict, 'checking'>> {
  if (res.status !== 503) return 'fault';
  try {
    const body: unknown = await res.json();
    return typeof body === 'object' && body !== null && 'reason' in body && body.reason === 'database' ? 'outage' : 'fault';
  } catch {
    return 'fault';
  }
}

function useVerdict(error: unknown): Verdict {
  const [verdict, setVerdict] = useState<Verdict>('checking');
  useEffect(() => {
    let live = true;
    setVerdict('checking');
    fetch('/api/ready', { cache: 'no-store' })
      .then(verdictFromReadiness)
      .catch((): Verdict => 'fault')
      .then((v) => {
        if (live) setVerdict(v);
      });
    return () => {
      live = false;
    };
  }, [error]);
  return verdict;
}

export function ErrorNotice({ error, retry }: { error: unknown; retry: () => void }) {
  const verdict = useVerdict(error);
  const digest = error instanceof Error && 'digest' in error && typeof error.digest === 'string' ? error.digest : null;
  return (
    <div className="mx-auto max-w-md space-y-4 py-8">
      <h1 className="text-2xl font-semibold">{verdict === 'outage' ? 'The database is not answering' : 'This page could not be shown'}</h1>
      <p role="status" aria-live="polite">
        {PAGE_MESSAGES[verdict]}
      </p>
      <button type="button" className={buttonClass} onClick={() => retry()}>
        Try again
      </button>
      {digest !== null && <p className="text-sm text-slate-600">Reference for the server log: {digest}</p>}
    </div>
  );
}


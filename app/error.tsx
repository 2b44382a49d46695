'use client';

import { ErrorNotice } from '@/components/ErrorNotice';

/**
 * Error boundary of every page below the root layout. The root layout's own errors (during a
 * database outage, the header's team switcher is the first to fail) reach app/global-error.tsx,
 * which shows the same notice.
 */
export default function ErrorPage({ error, retry }: { error: unknown; retry: () => void }) {
  return <ErrorNotice error={error} retry={retry} />;
}

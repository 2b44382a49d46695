'use client';

import { ErrorNotice } from '@/components/ErrorNotice';
import './globals.css';

/**
 * Replaces the root layout when the layout itself fails (during a database outage the header's
 * team switcher is the first thing to fail). Must render its own <html> and <body>.
 */
export default function GlobalError({ error, retry }: { error: unknown; retry: () => void }) {
  return (
    <html lang="en">
      <body className="min-h-screen font-sans antialiased">
        <title>Borderline</title>
        <main id="main" className="mx-auto max-w-6xl px-4 py-6">
          <ErrorNotice error={error} retry={retry} />
        </main>
      </body>
    </html>
  );
}

import Link from 'next/link';
import type { SampleDetail } from '@/lib/server/revisions';

/** One sample opened from a chart or a table: its text, labels and label history. */
export function SampleDetailPanel({ sample, closeHref }: { sample: SampleDetail; closeHref: string }) {
  return (
    <section aria-labelledby="sample-heading" className="space-y-2 rounded border-2 border-ink bg-white p-4" data-testid="sample-panel">
      <div className="flex items-baseline justify-between gap-2">
        <h2 id="sample-heading" className="text-lg font-semibold">
          Sample {sample.externalId}
        </h2>
        <Link href={closeHref} className="text-sm underline">
          Close sample
        </Link>
      </div>
      {sample.text ? <p className="max-w-3xl whitespace-pre-wrap">{sample.text}</p> : <p className="text-sm text-slate-700">This sample has no text.</p>}
      <p className="text-sm">
        Imported as <strong>{sample.originalLabel}</strong>, now <strong>{sample.currentLabel}</strong>.
      </p>
      {sample.changes.length > 0 ? (
        <ul className="list-disc pl-5 text-sm">
          {sample.changes.map((c) => (
            <li key={c.revision}>
              Revision {c.revision}: {c.from} → {c.to}
            </li>
          ))}
        </ul>
      ) : null}
    </section>
  );
}

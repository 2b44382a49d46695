'use client';

import { buttonClass, inputClass, secondaryButtonClass } from '../form-parts';

/**
 * Export downloads: plain GET forms to the export route (the browser saves the attachment and
 * stays on the page), so they work from the keyboard and without scripts.
 */
export function ExportPanel({ projectId, currentRevision }: { projectId: string; currentRevision: number }) {
  const action = `/api/projects/${encodeURIComponent(projectId)}/export`;
  return (
    <section aria-labelledby="export-heading" className="space-y-4 rounded border border-slate-300 bg-white p-4">
      <h2 id="export-heading" className="text-lg font-semibold">
        Export
      </h2>
      <form method="get" action={action} className="space-y-3">
        <fieldset className="space-y-2">
          <legend className="text-sm font-medium">Current labels with their history</legend>
          <p className="text-sm text-slate-700">
            Each sample’s id, current and original label, the revision where the label was set, and the reviewers’ votes that decided it.
            Cells a spreadsheet would run as a formula are prefixed with an apostrophe; importing the file again removes it.
          </p>
          <label className="flex items-center gap-2 text-sm">
            <input type="checkbox" name="features" value="1" />
            Include text, image, metadata and feature vectors (needed to import the file again)
          </label>
          <div className="flex flex-wrap items-end gap-3">
            <div className="space-y-1">
              <label htmlFor="export-since" className="block text-sm font-medium">
                Only labels set after revision (optional)
              </label>
              <input
                id="export-since"
                name="since"
                type="number"
                min={0}
                max={currentRevision}
                inputMode="numeric"
                className={`${inputClass} w-32`}
                placeholder="all"
              />
            </div>
            <button type="submit" name="format" value="csv" className={buttonClass}>
              Download CSV
            </button>
            <button type="submit" name="format" value="jsonl" className={secondaryButtonClass}>
              Download JSON Lines
            </button>
          </div>
        </fieldset>
      </form>
      <form method="get" action={action} className="space-y-2">
        <input type="hidden" name="format" value="report" />
        <p className="text-sm text-slate-700">
          <strong>Audit report</strong> (JSON): every revision with its fit’s metrics, the class sizes, and the reviewers’ agreement (percent of
          items whose two votes agreed, vote and outcome counts).
        </p>
        <button type="submit" className={secondaryButtonClass}>
          Download audit report
        </button>
      </form>
    </section>
  );
}

'use client';

import { toCsv, type Cell } from './csv';

/** "Download CSV" for one chart's data; the file is built in the browser from the rows given. */
export function DownloadCsv({ filename, header, rows, label = 'Download CSV' }: { filename: string; header: readonly string[]; rows: readonly (readonly Cell[])[]; label?: string }) {
  return (
    <button
      type="button"
      className="rounded border border-slate-400 bg-white px-2 py-1 text-sm hover:bg-slate-100"
      onClick={() => {
        const url = URL.createObjectURL(new Blob([toCsv(header, rows)], { type: 'text/csv;charset=utf-8' }));
        const a = document.createElement('a');
        a.href = url;
        a.download = filename;
        document.body.appendChild(a);
        a.click();
        a.remove();
        setTimeout(() => URL.revokeObjectURL(url), 1000);
      }}
    >
      {label}
      <span className="sr-only"> ({filename})</span>
    </button>
  );
}

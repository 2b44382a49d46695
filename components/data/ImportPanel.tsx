'use client';

import { useRouter } from 'next/navigation';
import { useId, useMemo, useRef, useState, type ChangeEvent, type FormEvent } from 'react';
import { analyseHeader, previewHead, type ColumnRole, type PreviewResult } from '@/lib/data-columns';
import { DATA_LIMITS, IMPORT_MODE_SUMMARY, IMPORT_MODES, type ImportMode } from '@/lib/domain-data';
import type { ImportOutcome, ImportProblem, ImportStreamLineView } from './import-types';
import { buttonClass, inputClass, Notice, secondaryButtonClass } from '../form-parts';

type Props = {
  projectId: string;
  featureCount: number;
  maxClasses: number;
  classCount: number;
};

type Stage = 'idle' | 'images' | 'uploading' | 'server' | 'done' | 'refused' | 'failed';

type Progress = {
  images: { sent: number; total: number };
  upload: { loaded: number; total: number };
  server: { phase: 'reading' | 'writing' | 'done'; rows: number; written: number };
};

type Outcome =
  | { ok: true; text: string }
  | { ok: false; problems: ImportProblem[]; truncated: boolean; rows: number };

const PREVIEW_BYTES = 64 * 1024;
const PREVIEW_COLUMNS = 8;
const ROLE_TEXT: Record<ColumnRole, string> = {
  id: 'id',
  label: 'label',
  text: 'text',
  image: 'image',
  meta: 'metadata',
  feature: 'feature',
  'features-array': 'features (array)',
  ignored: 'ignored',
};

const n = (x: number) => x.toLocaleString('en-US');
const mb = (bytes: number) =>
  bytes < 1024 * 1024 ? `${Math.max(1, Math.round(bytes / 1024))} KB` : `${(bytes / (1024 * 1024)).toFixed(bytes < 10 * 1024 * 1024 ? 1 : 0)} MB`;

/** 32 random hex characters (getRandomValues also works outside secure contexts, unlike randomUUID). */
function uploadBatchId(): string {
  const bytes = crypto.getRandomValues(new Uint8Array(16));
  return Array.from(bytes, (b) => b.toString(16).padStart(2, '0')).join('');
}

/** POSTs a body with XMLHttpRequest (for upload progress); `onText` sees the answer as it streams in. */
function post(
  url: string,
  body: Blob,
  handlers: { onUpload?: (loaded: number, total: number) => void; onText?: (text: string) => void; onXhr?: (xhr: XMLHttpRequest) => void },
): Promise<{ status: number; text: string }> {
  return new Promise((resolve, reject) => {
    const xhr = new XMLHttpRequest();
    xhr.open('POST', url);
    xhr.setRequestHeader('content-type', body.type || 'application/octet-stream');
    xhr.upload.onprogress = (e) => handlers.onUpload?.(e.loaded, e.lengthComputable ? e.total : body.size);
    xhr.onprogress = () => handlers.onText?.(xhr.responseText);
    xhr.onload = () => resolve({ status: xhr.status, text: xhr.responseText });
    xhr.onerror = () => reject(new Error('network'));
    xhr.onabort = () => reject(new Error('aborted'));
    handlers.onXhr?.(xhr);
    xhr.send(body);
  });
}

function parseLines(text: string): ImportStreamLineView[] {
  const out: ImportStreamLineView[] = [];
  for (const line of text.split('\n')) {
    if (line.trim() === '') continue;
    try {
      out.push(JSON.parse(line) as ImportStreamLineView);
    } catch {
      // a line still arriving
    }
  }
  return out;
}

function summary(o: Extract<ImportOutcome, { ok: true }>): string {
  const parts = [`${n(o.added)} added`];
  if (o.mode === 'update') parts.push(`${n(o.relabelled)} relabelled`, `${n(o.updated)} updated`, `${n(o.unchanged)} unchanged`);
  const classes = o.newClasses.length > 0 ? ` New classes: ${o.newClasses.join(', ')}.` : '';
  const revision =
    o.revisionNumber === null
      ? ' Nothing changed, so no new revision was made.'
      : ` This is revision ${o.revisionNumber}; a refit of it has been queued.`;
  return `Imported ${n(o.rows)} rows from ${o.fileName}: ${parts.join(', ')}.${classes}${revision}`;
}

/** Upload with preview, mode, feature prefix, images; progress of the upload and of the server's checks. */
export function ImportPanel({ projectId, featureCount, maxClasses, classCount }: Props) {
  const router = useRouter();
  const ids = { file: useId(), images: useId(), prefix: useId(), preview: useId(), progress: useId() };
  const [file, setFile] = useState<File | null>(null);
  const [head, setHead] = useState<{ bytes: Uint8Array; complete: boolean } | null>(null);
  const [images, setImages] = useState<File[]>([]);
  const [mode, setMode] = useState<ImportMode>('insert');
  const [prefix, setPrefix] = useState('');
  const [stage, setStage] = useState<Stage>('idle');
  const [progress, setProgress] = useState<Progress>({ images: { sent: 0, total: 0 }, upload: { loaded: 0, total: 0 }, server: { phase: 'reading', rows: 0, written: 0 } });
  const [outcome, setOutcome] = useState<Outcome | null>(null);
  const [failure, setFailure] = useState<string | null>(null);
  const xhrRef = useRef<XMLHttpRequest | null>(null);
  const fileInput = useRef<HTMLInputElement>(null);

  const preview: PreviewResult | null = useMemo(
    () => (head === null ? null : previewHead(head.bytes, head.complete, { featurePrefix: prefix })),
    [head, prefix],
  );
  const busy = stage === 'images' || stage === 'uploading' || stage === 'server';

  async function onFile(event: ChangeEvent<HTMLInputElement>) {
    const chosen = event.currentTarget.files?.[0] ?? null;
    setOutcome(null);
    setFailure(null);
    setStage('idle');
    setFile(chosen);
    setHead(null);
    if (chosen === null) return;
    const bytes = new Uint8Array(await chosen.slice(0, PREVIEW_BYTES).arrayBuffer());
    setHead({ bytes, complete: chosen.size <= PREVIEW_BYTES });
  }

  async function onSubmit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    if (file === null) {
      setFailure('Choose a CSV or JSON Lines file first.');
      fileInput.current?.focus();
      return;
    }
    if (file.size > DATA_LIMITS.importBytes) {
      setFailure(`The file is larger than ${mb(DATA_LIMITS.importBytes)}; split it into parts and import them in update mode.`);
      return;
    }
    setOutcome(null);
    setFailure(null);
    const batch = images.length > 0 ? uploadBatchId() : null;
    try {
      if (batch !== null) {
        setStage('images');
        for (let i = 0; i < images.length; i++) {
          setProgress((p) => ({ ...p, images: { sent: i, total: images.length } }));
          const img = images[i];
          const q = new URLSearchParams({ uploadBatch: batch, name: img.name });
          const r = await post(`/api/projects/${encodeURIComponent(projectId)}/imports/images?${q}`, img, { onXhr: (x) => (xhrRef.current = x) });
          if (r.status !== 200) {
            const message = (JSON.parse(r.text) as { error?: string }).error ?? 'The image was refused.';
            setFailure(`${img.name}: ${message}`);
            setStage('failed');
            return;
          }
        }
        setProgress((p) => ({ ...p, images: { sent: images.length, total: images.length } }));
      }
      setStage('uploading');
      setProgress((p) => ({ ...p, upload: { loaded: 0, total: file.size }, server: { phase: 'reading', rows: 0, written: 0 } }));
      const q = new URLSearchParams({ mode, fileName: file.name });
      if (prefix.trim() !== '') q.set('featurePrefix', prefix.trim());
      if (batch !== null) q.set('uploadBatch', batch);
      const r = await post(`/api/projects/${encodeURIComponent(projectId)}/imports?${q}`, file, {
        onXhr: (x) => (xhrRef.current = x),
        onUpload: (loaded, total) => {
          setProgress((p) => ({ ...p, upload: { loaded, total } }));
          if (loaded >= total) setStage('server');
        },
        onText: (text) => {
          const lines = parseLines(text);
          const last = [...lines].reverse().find((l) => l.type === 'progress');
          if (last && last.type === 'progress') {
            setProgress((p) => ({ ...p, server: { phase: last.phase, rows: last.rows, written: last.written } }));
            if (last.phase === 'writing') setStage('server');
          }
        },
      });
      xhrRef.current = null;
      if (r.status !== 200) {
        let message = 'The import was refused.';
        try {
          message = (JSON.parse(r.text) as { error?: string }).error ?? message;
        } catch {
          // not JSON
        }
        setFailure(message);
        setStage('failed');
        return;
      }
      const lines = parseLines(r.text);
      const end = lines.at(-1);
      if (end?.type === 'result') {
        if (end.outcome.ok) {
          setOutcome({ ok: true, text: summary(end.outcome) });
          setStage('done');
          router.refresh();
        } else {
          setOutcome({ ok: false, problems: end.outcome.problems, truncated: end.outcome.truncated, rows: end.outcome.rows });
          setStage('refused');
          router.refresh();
        }
      } else if (end?.type === 'error') {
        setFailure(end.error);
        setStage('failed');
      } else {
        setFailure('The connection ended before the server answered. Reload the page to see whether the import was applied.');
        setStage('failed');
      }
    } catch (error) {
      xhrRef.current = null;
      const aborted = error instanceof Error && error.message === 'aborted';
      setFailure(
        aborted
          ? 'Import cancelled before the file reached the server. Nothing in the project changed.'
          : 'The file could not be sent. Check your connection and try again; nothing in the project changed unless the history below says so.',
      );
      setStage('failed');
    }
  }

  function cancel() {
    xhrRef.current?.abort();
  }

  const uploadPercent = progress.upload.total > 0 ? Math.round((progress.upload.loaded / progress.upload.total) * 100) : 0;
  const analysis = preview?.analysis ?? (preview?.format === 'csv' && preview.header.length > 0 ? analyseHeader(preview.header, { featurePrefix: prefix }) : null);
  const featureColumns = analysis ? (analysis.featuresArrayIndex >= 0 ? null : analysis.featureIndices.length) : null;
  const countMismatch = featureColumns !== null && featureCount > 0 && featureColumns !== featureCount;

  return (
    <form onSubmit={onSubmit} noValidate className="space-y-4 rounded border border-slate-300 bg-white p-4" aria-labelledby="import-heading">
      <h2 id="import-heading" className="text-lg font-semibold">
        Import samples
      </h2>
      <p className="text-sm text-slate-700">
        CSV (comma-separated, RFC 4180) or JSON Lines. Columns: <code>id</code>, <code>label</code>, the features (every other column, a
        chosen prefix, or a <code>features</code> array), and optionally <code>text</code>, <code>image</code> and <code>meta.*</code>.
        The whole file is checked before anything is written; if any row is wrong, nothing is imported.
        {featureCount > 0 ? ` This project expects ${n(featureCount)} features per sample.` : ' The first import sets the number of features.'}{' '}
        Classes: {classCount} of at most {maxClasses}.
      </p>

      <div className="grid gap-4 md:grid-cols-2">
        <div className="space-y-1">
          <label htmlFor={ids.file} className="block text-sm font-medium">
            Data file
          </label>
          <input
            id={ids.file}
            ref={fileInput}
            type="file"
            accept=".csv,.jsonl,.ndjson,.txt,text/csv,application/x-ndjson"
            onChange={onFile}
            disabled={busy}
            className="block w-full text-sm file:mr-3 file:rounded file:border file:border-slate-400 file:bg-white file:px-3 file:py-1.5"
          />
          {file ? (
            <p className="text-sm text-slate-600">
              {file.name} · {mb(file.size)}
            </p>
          ) : null}
        </div>
        <div className="space-y-1">
          <label htmlFor={ids.images} className="block text-sm font-medium">
            Images sent with the file (optional)
          </label>
          <input
            id={ids.images}
            type="file"
            multiple
            accept="image/png,image/jpeg,image/gif,image/webp"
            disabled={busy}
            onChange={(e) => setImages(Array.from(e.currentTarget.files ?? []))}
            aria-describedby={`${ids.images}-hint`}
            className="block w-full text-sm file:mr-3 file:rounded file:border file:border-slate-400 file:bg-white file:px-3 file:py-1.5"
          />
          <p id={`${ids.images}-hint`} className="text-sm text-slate-600">
            An <code>image</code> cell that is not an http(s) URL must name one of these files. PNG, JPEG, GIF or WebP, up to{' '}
            {mb(DATA_LIMITS.imageBytes)} each.{images.length > 0 ? ` ${images.length} chosen.` : ''}
          </p>
        </div>
      </div>

      <fieldset className="space-y-2">
        <legend className="text-sm font-medium">Mode</legend>
        {IMPORT_MODES.map((m) => (
          <label key={m} className="flex items-start gap-2 text-sm">
            <input type="radio" name="mode" value={m} checked={mode === m} onChange={() => setMode(m)} disabled={busy} className="mt-1" />
            <span>
              <strong>{m === 'insert' ? 'Add' : 'Add or update'}</strong> — {IMPORT_MODE_SUMMARY[m]}
            </span>
          </label>
        ))}
      </fieldset>

      <div className="max-w-sm space-y-1">
        <label htmlFor={ids.prefix} className="block text-sm font-medium">
          Feature prefix (optional)
        </label>
        <input
          id={ids.prefix}
          className={inputClass}
          value={prefix}
          maxLength={64}
          onChange={(e) => setPrefix(e.currentTarget.value)}
          disabled={busy}
          placeholder="e.g. emb_"
          aria-describedby={`${ids.prefix}-hint`}
        />
        <p id={`${ids.prefix}-hint`} className="text-sm text-slate-600">
          When set, only columns (or JSON fields) whose name starts with it are features; other unnamed columns are ignored.
        </p>
      </div>

      {preview ? (
        <section aria-labelledby={ids.preview} className="space-y-2">
          <h3 id={ids.preview} className="font-semibold">
            Preview of the first rows
          </h3>
          {preview.problem ? (
            <Notice kind="problem">{preview.problem}</Notice>
          ) : (
            <>
              <ColumnSummary preview={preview} />
              {countMismatch ? (
                <Notice kind="problem">
                  The file has {n(featureColumns)} feature column{featureColumns === 1 ? '' : 's'}; this project expects {n(featureCount)}. The
                  import will be refused unless a feature prefix picks the right columns.
                </Notice>
              ) : null}
              {analysis && analysis.problems.length > 0 ? (
                <Notice kind="problem">
                  {analysis.problems.map((p) => (p.index === null ? p.detail : `Column ${p.index + 1}: ${p.detail}`)).join(' ')}
                </Notice>
              ) : null}
              <PreviewTable preview={preview} />
            </>
          )}
        </section>
      ) : null}

      <div className="flex flex-wrap items-center gap-3">
        <button type="submit" className={buttonClass} disabled={busy || file === null}>
          Check and import
        </button>
        {stage === 'images' || stage === 'uploading' ? (
          <button type="button" className={secondaryButtonClass} onClick={cancel}>
            Cancel upload
          </button>
        ) : null}
      </div>

      {busy ? (
        <section aria-labelledby={ids.progress} className="space-y-3 rounded border border-slate-300 bg-slate-50 p-3">
          <h3 id={ids.progress} className="font-semibold">
            Progress
          </h3>
          {progress.images.total > 0 ? (
            <ProgressLine label="Images" value={progress.images.sent} max={progress.images.total} text={`${progress.images.sent} of ${progress.images.total} sent`} />
          ) : null}
          <ProgressLine
            label="Upload"
            value={progress.upload.loaded}
            max={Math.max(1, progress.upload.total)}
            text={`${mb(progress.upload.loaded)} of ${mb(progress.upload.total)} (${uploadPercent} %)`}
          />
          <p className="text-sm" aria-live="polite">
            {stage !== 'server'
              ? 'The server checks the rows as they arrive.'
              : progress.server.phase === 'reading'
                ? `Checked ${n(progress.server.rows)} rows so far.`
                : `All ${n(progress.server.rows)} rows passed the checks. Writing them to the project.`}
          </p>
          {progress.server.phase === 'writing' ? (
            <ProgressLine label="Writing" value={progress.server.written} max={Math.max(1, progress.server.rows)} text={`${n(progress.server.written)} of ${n(progress.server.rows)} rows`} />
          ) : null}
          {stage === 'server' ? (
            <p className="text-sm text-slate-600">The file is with the server now: it is applied as a whole or not at all.</p>
          ) : null}
        </section>
      ) : null}

      {failure ? <Notice kind="problem">{failure}</Notice> : null}
      {outcome?.ok ? <Notice kind="done">{outcome.text}</Notice> : null}
      {outcome && !outcome.ok ? (
        <div role="alert" className="space-y-2 rounded border-l-4 border-oi-vermilion bg-orange-50 px-3 py-2 text-sm">
          <p>
            <span aria-hidden="true" className="font-bold text-[#9a3f00]">
              ▲{' '}
            </span>
            <span className="font-semibold">Not imported.</span> Nothing in the project changed. Fix {outcome.problems.length === 1 ? 'this problem' : 'these problems'} and
            import the file again:
          </p>
          <ol className="list-decimal space-y-1 pl-6">
            {outcome.problems.map((p, i) => (
              <li key={i}>{p.message}</li>
            ))}
          </ol>
          {outcome.truncated ? <p>Only the first {outcome.problems.length} problems are listed; reading stopped there.</p> : null}
        </div>
      ) : null}
    </form>
  );
}

function ProgressLine({ label, value, max, text }: { label: string; value: number; max: number; text: string }) {
  const id = useId();
  const percent = max > 0 ? Math.min(100, Math.max(0, (value / max) * 100)) : 0;
  return (
    <div className="space-y-1">
      <div className="flex justify-between text-sm">
        <span id={id}>{label}</span>
        <span className="tabular-nums">{text}</span>
      </div>
      <div
        role="progressbar"
        aria-labelledby={id}
        aria-valuemin={0}
        aria-valuemax={max}
        aria-valuenow={value}
        aria-valuetext={text}
        className="h-3 w-full overflow-hidden rounded border border-slate-400 bg-white"
      >
        <div className="h-full bg-oi-blue" style={{ width: `${percent}%` }} />
      </div>
    </div>
  );
}

function ColumnSummary({ preview }: { preview: PreviewResult }) {
  if (preview.format === 'jsonl') {
    return (
      <p className="text-sm">
        <strong>JSON Lines.</strong> Fields in the first lines: {preview.header.map((h) => <code key={h} className="mr-1">{h}</code>)}
      </p>
    );
  }
  const a = preview.analysis;
  if (!a) return null;
  const names = (idx: number[]) => idx.map((i) => a.columns[i].name);
  const features = names(a.featureIndices);
  const ignored = a.columns.filter((c) => c.role === 'ignored').map((c) => c.name || `column ${c.index + 1}`);
  return (
    <ul className="space-y-0.5 text-sm">
      <li>
        <strong>CSV</strong> with {preview.header.length} columns.
      </li>
      <li>
        Features:{' '}
        {a.featuresArrayIndex >= 0
          ? 'a JSON array in the "features" column'
          : features.length === 0
            ? 'none found'
            : `${features.length} column${features.length === 1 ? '' : 's'} (${features.length > 4 ? `${features.slice(0, 2).join(', ')} … ${features.at(-1)}` : features.join(', ')})`}
      </li>
      {a.metaColumns.length > 0 ? <li>Metadata: {a.metaColumns.map((m) => m.key).join(', ')}</li> : null}
      {a.textIndex >= 0 || a.imageIndex >= 0 ? (
        <li>
          Also: {[a.textIndex >= 0 ? 'text' : null, a.imageIndex >= 0 ? 'image' : null].filter(Boolean).join(', ')}
        </li>
      ) : null}
      {ignored.length > 0 ? <li>Ignored: {ignored.join(', ')}</li> : null}
    </ul>
  );
}

function PreviewTable({ preview }: { preview: PreviewResult }) {
  const shown = preview.header.slice(0, PREVIEW_COLUMNS);
  const hidden = preview.header.length - shown.length;
  const roles = preview.analysis?.columns;
  return (
    <div className="overflow-x-auto rounded border border-slate-200" tabIndex={0} role="region" aria-label="Preview of the first rows (scrolls sideways)">
      <table className="border-collapse text-sm">
        <thead>
          <tr className="border-b border-slate-300 bg-slate-50 text-left">
            {shown.map((h, i) => (
              <th key={i} scope="col" className="px-2 py-1 font-semibold">
                <span className="block">{h || <em>(no name)</em>}</span>
                {roles ? <span className="block text-xs font-normal text-slate-600">{ROLE_TEXT[roles[i].role]}</span> : null}
              </th>
            ))}
            {hidden > 0 ? (
              <th scope="col" className="px-2 py-1 font-normal text-slate-600">
                … {hidden} more
              </th>
            ) : null}
          </tr>
        </thead>
        <tbody>
          {preview.rows.map((row, r) => (
            <tr key={r} className="border-b border-slate-200">
              {shown.map((_, i) => (
                <td key={i} className="max-w-48 truncate px-2 py-1 font-mono text-xs" title={row[i] ?? ''}>
                  {row[i] ?? ''}
                </td>
              ))}
              {hidden > 0 ? <td className="px-2 py-1 text-slate-500">…</td> : null}
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}

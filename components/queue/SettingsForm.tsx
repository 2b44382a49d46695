'use client';

import { useState } from 'react';
import { updateProjectSettings } from '@/app/actions/update-project-settings';
import type { ProjectSettings } from '@/lib/domain-queue';

type Field = keyof ProjectSettings;

function NumberField({
  name,
  label,
  hint,
  value,
  step,
  min,
  max,
  error,
  onChange,
}: {
  name: Field;
  label: string;
  hint: string;
  value: number;
  step: string;
  min: number;
  max: number;
  error?: string;
  onChange: (v: number) => void;
}) {
  return (
    <label className="block space-y-1">
      <span className="font-medium">{label}</span>
      <input
        name={name}
        type="number"
        inputMode="decimal"
        step={step}
        min={min}
        max={max}
        value={Number.isFinite(value) ? value : ''}
        onChange={(e) => onChange(e.target.value === '' ? NaN : Number(e.target.value))}
        aria-invalid={error ? true : undefined}
        aria-describedby={`${name}-hint`}
        className="block w-40 rounded border border-slate-400 px-2 py-1"
      />
      <span id={`${name}-hint`} className="block text-xs text-slate-600">
        {hint}
      </span>
      {error && (
        <span role="alert" className="block text-sm text-[#8a3c00]">
          <span aria-hidden="true">⚠ </span>
          {error}
        </span>
      )}
    </label>
  );
}

/** The lead's form for a project's fit and queue settings. */
export function SettingsForm({ projectId, initial }: { projectId: string; initial: ProjectSettings }) {
  const [s, setS] = useState<ProjectSettings>(initial);
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [message, setMessage] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const set = <K extends Field>(k: K, v: ProjectSettings[K]) => setS((prev) => ({ ...prev, [k]: v }));
  const err = (k: Field) => errors[`settings.${k}`];

  const submit = async (e: React.FormEvent) => {
    e.preventDefault();
    setBusy(true);
    setMessage(null);
    const r = await updateProjectSettings({ projectId, settings: s });
    setBusy(false);
    if (!r.ok) {
      setErrors(r.fields ?? {});
      setMessage(r.error);
      return;
    }
    setErrors({});
    setMessage(r.data.refitRevision !== null ? `Saved. A refit of revision ${r.data.refitRevision} with these settings has been queued.` : 'Saved.');
  };

  return (
    <form onSubmit={(e) => void submit(e)} className="max-w-3xl space-y-6 text-sm" noValidate>
      <fieldset className="space-y-3 rounded border border-slate-300 bg-white p-4">
        <legend className="px-1 font-semibold">Classifier</legend>
        <label className="block space-y-1">
          <span className="font-medium">Kernel</span>
          <select name="kernel" value={s.kernel} onChange={(e) => set('kernel', e.target.value as ProjectSettings['kernel'])} className="block rounded border border-slate-400 px-2 py-1">
            <option value="linear">linear</option>
            <option value="rbf">RBF (Gaussian)</option>
            <option value="poly">polynomial</option>
          </select>
        </label>
        <label className="flex items-center gap-2">
          <input type="checkbox" name="autoSelect" checked={s.autoSelect} onChange={(e) => set('autoSelect', e.target.checked)} />
          <span>Choose C{s.kernel === 'rbf' ? ' and γ' : ''} automatically by cross-validation (slower fits)</span>
        </label>
        {!s.autoSelect && (
          <NumberField name="C" label="C (soft-margin cost)" hint="Larger C tolerates fewer margin violations; 1 is a common start." value={s.C} step="any" min={0} max={1e6} error={err('C')} onChange={(v) => set('C', v)} />
        )}
        {s.kernel !== 'linear' && !s.autoSelect && (
          <label className="block space-y-1">
            <span className="font-medium">γ (kernel width)</span>
            <input
              name="gamma"
              type="number"
              step="any"
              min={0}
              value={s.gamma ?? ''}
              placeholder="1 / number of features"
              onChange={(e) => set('gamma', e.target.value === '' ? null : Number(e.target.value))}
              className="block w-40 rounded border border-slate-400 px-2 py-1"
            />
            <span className="block text-xs text-slate-600">Empty: 1 / number of features.</span>
          </label>
        )}
        {s.kernel === 'poly' && (
          <NumberField name="degree" label="Degree" hint="Polynomial degree." value={s.degree} step="1" min={1} max={10} error={err('degree')} onChange={(v) => set('degree', v)} />
        )}
        <label className="block space-y-1">
          <span className="font-medium">Solver</span>
          <select name="solver" value={s.solver} onChange={(e) => set('solver', e.target.value as ProjectSettings['solver'])} className="block rounded border border-slate-400 px-2 py-1">
            <option value="auto">automatic (dual coordinate descent for large linear problems, otherwise SMO)</option>
            <option value="smo">SMO (exact, any kernel)</option>
            <option value="dcd">dual coordinate descent (linear only)</option>
          </select>
          {err('solver') && (
            <span role="alert" className="block text-sm text-[#8a3c00]">
              <span aria-hidden="true">⚠ </span>
              {err('solver')}
            </span>
          )}
        </label>
        <label className="block space-y-1">
          <span className="font-medium">Feature scaling</span>
          <select name="scale" value={s.scale} onChange={(e) => set('scale', e.target.value as ProjectSettings['scale'])} className="block rounded border border-slate-400 px-2 py-1">
            <option value="standard">standardise each feature (tabular measurements)</option>
            <option value="l2">L2-normalise each sample (embeddings)</option>
            <option value="none">none</option>
          </select>
        </label>
        <NumberField name="folds" label="Folds for held-out margins" hint="2 – 10; each sample is also scored by a model that never saw it." value={s.folds} step="1" min={2} max={10} error={err('folds')} onChange={(v) => set('folds', v)} />
      </fieldset>

      <fieldset className="space-y-3 rounded border border-slate-300 bg-white p-4">
        <legend className="px-1 font-semibold">Flags</legend>
        <NumberField name="nearBand" label="Near-boundary band" hint="In margin half-widths: a sample with |f(x)| at most this is flagged near-boundary." value={s.nearBand} step="0.05" min={0} max={5} error={err('nearBand')} onChange={(v) => set('nearBand', v)} />
        <NumberField name="pivotThreshold" label="Pivot threshold" hint="Relative change of the margin width (0.05 = 5 %) when a support vector is removed." value={s.pivotThreshold} step="0.01" min={0} max={1} error={err('pivotThreshold')} onChange={(v) => set('pivotThreshold', v)} />
        <NumberField name="pivotCap" label="Support vectors tested as pivots" hint="Per boundary, the most influential first; 0 turns pivots off." value={s.pivotCap} step="1" min={0} max={500} error={err('pivotCap')} onChange={(v) => set('pivotCap', v)} />
      </fieldset>

      <fieldset className="space-y-3 rounded border border-slate-300 bg-white p-4">
        <legend className="px-1 font-semibold">Queue</legend>
        <NumberField name="queueCap" label="Queue cap" hint="Most items awaiting votes at once, the most suspicious first." value={s.queueCap} step="1" min={1} max={20000} error={err('queueCap')} onChange={(v) => set('queueCap', v)} />
        <NumberField
          name="applyEvery"
          label="Apply rule"
          hint="Agreed relabels become a new revision automatically once this many are pending; 0 = only when a lead applies them."
          value={s.applyEvery}
          step="1"
          min={0}
          max={10000}
          error={err('applyEvery')}
          onChange={(v) => set('applyEvery', v)}
        />
      </fieldset>

      <div className="flex items-center gap-3">
        <button type="submit" disabled={busy} className="rounded bg-oi-blue px-4 py-2 font-medium text-white disabled:opacity-50">
          Save settings
        </button>
        {message && (
          <p role="status" className="text-sm">
            {message}
          </p>
        )}
      </div>
    </form>
  );
}

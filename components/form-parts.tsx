'use client';

import { useId, useState, type InputHTMLAttributes, type ReactNode } from 'react';

/**
 * Small accessible form pieces shared by the account and team screens: a labelled field with its
 * own error line (aria-describedby), a password field with a show/hide switch (ASVS 5.0 6.2.6),
 * and a message box that is announced to screen readers. Errors pair the vermilion colour with
 * an icon and the word "Problem", never colour alone.
 */

export const inputClass =
  'block w-full rounded border border-slate-400 bg-white px-3 py-2 text-ink shadow-sm focus:border-oi-blue focus:outline-none aria-[invalid=true]:border-oi-vermilion aria-[invalid=true]:border-2';

export const buttonClass =
  'inline-flex items-center justify-center gap-2 rounded bg-oi-blue px-4 py-2 font-medium text-white hover:bg-[#005f93] disabled:cursor-not-allowed disabled:opacity-60';

export const secondaryButtonClass =
  'inline-flex items-center justify-center gap-2 rounded border border-slate-400 bg-white px-3 py-1.5 text-sm text-ink hover:bg-slate-100 disabled:cursor-not-allowed disabled:opacity-60';

export const dangerButtonClass =
  'inline-flex items-center justify-center gap-2 rounded border border-oi-vermilion bg-white px-3 py-1.5 text-sm text-[#9a3f00] hover:bg-orange-50 disabled:cursor-not-allowed disabled:opacity-60';

type FieldProps = {
  label: string;
  hint?: ReactNode;
  error?: string;
} & InputHTMLAttributes<HTMLInputElement>;

export function Field({ label, hint, error, id, className, ...input }: FieldProps) {
  const auto = useId();
  const inputId = id ?? auto;
  const hintId = hint ? `${inputId}-hint` : undefined;
  const errorId = error ? `${inputId}-error` : undefined;
  return (
    <div className={className ?? 'space-y-1'}>
      <label htmlFor={inputId} className="block text-sm font-medium">
        {label}
      </label>
      {hint ? (
        <p id={hintId} className="text-sm text-slate-600">
          {hint}
        </p>
      ) : null}
      <input
        id={inputId}
        className={inputClass}
        aria-invalid={error ? true : undefined}
        aria-describedby={[hintId, errorId].filter(Boolean).join(' ') || undefined}
        {...input}
      />
      {error ? <FieldError id={errorId} message={error} /> : null}
    </div>
  );
}

export function FieldError({ id, message }: { id?: string; message: string }) {
  return (
    <p id={id} className="flex items-start gap-1 text-sm text-[#9a3f00]">
      <span aria-hidden="true">▲</span>
      <span>{message}</span>
    </p>
  );
}

type PasswordFieldProps = Omit<FieldProps, 'type'>;

/** type=password with a "Show" switch; paste and password managers work as usual. */
export function PasswordField({ label, hint, error, id, ...input }: PasswordFieldProps) {
  const auto = useId();
  const inputId = id ?? auto;
  const [shown, setShown] = useState(false);
  const hintId = hint ? `${inputId}-hint` : undefined;
  const errorId = error ? `${inputId}-error` : undefined;
  return (
    <div className="space-y-1">
      <label htmlFor={inputId} className="block text-sm font-medium">
        {label}
      </label>
      {hint ? (
        <p id={hintId} className="text-sm text-slate-600">
          {hint}
        </p>
      ) : null}
      <div className="flex gap-2">
        <input
          id={inputId}
          type={shown ? 'text' : 'password'}
          className={inputClass}
          aria-invalid={error ? true : undefined}
          aria-describedby={[hintId, errorId].filter(Boolean).join(' ') || undefined}
          autoCapitalize="none"
          autoCorrect="off"
          spellCheck={false}
          {...input}
        />
        <button
          type="button"
          className={secondaryButtonClass}
          aria-pressed={shown}
          aria-controls={inputId}
          onClick={() => setShown((s) => !s)}
        >
          {shown ? 'Hide' : 'Show'}
        </button>
      </div>
      {error ? <FieldError id={errorId} message={error} /> : null}
    </div>
  );
}

/** A status or problem message, announced politely (status) or assertively (problem). */
export function Notice({ kind, children }: { kind: 'problem' | 'done' | 'info'; children: ReactNode }) {
  if (kind === 'problem') {
    return (
      <div role="alert" className="flex gap-2 rounded border-l-4 border-oi-vermilion bg-orange-50 px-3 py-2 text-sm">
        <span aria-hidden="true" className="font-bold text-[#9a3f00]">
          ▲
        </span>
        <div>
          <span className="font-semibold">Problem: </span>
          {children}
        </div>
      </div>
    );
  }
  return (
    <div
      role="status"
      className={`flex gap-2 rounded border-l-4 px-3 py-2 text-sm ${kind === 'done' ? 'border-oi-green bg-emerald-50' : 'border-oi-sky bg-sky-50'}`}
    >
      <span aria-hidden="true" className="font-bold">
        {kind === 'done' ? '✓' : 'i'}
      </span>
      <div>{children}</div>
    </div>
  );
}

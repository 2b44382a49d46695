'use client';

import { useRouter } from 'next/navigation';
import { useId, useRef, useState, type FormEvent } from 'react';
import { createPipelineToken } from '@/app/actions/create-pipeline-token';
import { revokePipelineToken } from '@/app/actions/revoke-pipeline-token';
import { DATA_LIMITS } from '@/lib/domain-data';
import { buttonClass, dangerButtonClass, Field, inputClass, Notice, secondaryButtonClass } from '../form-parts';

export type TokenRow = {
  id: string;
  name: string;
  prefix: string;
  createdBy: string;
  createdAt: string;
  lastUsedAt: string | null;
  revokedAt: string | null;
};

const when = (iso: string | null) =>
  iso === null ? 'never' : `${new Date(iso).toLocaleString('en-GB', { dateStyle: 'medium', timeStyle: 'short', timeZone: 'UTC' })} UTC`;

/** Pipeline tokens of one project (leads only): create (the secret is shown once), list, revoke. */
export function TokenPanel({ projectId, tokens }: { projectId: string; tokens: TokenRow[] }) {
  const router = useRouter();
  const headingId = useId();
  const secretId = useId();
  const [message, setMessage] = useState<{ kind: 'problem' | 'done'; text: string } | null>(null);
  const [fieldError, setFieldError] = useState<string | undefined>(undefined);
  const [created, setCreated] = useState<{ name: string; secret: string } | null>(null);
  const [copied, setCopied] = useState(false);
  const [confirming, setConfirming] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const secretRef = useRef<HTMLInputElement>(null);

  async function onCreate(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const formEl = event.currentTarget;
    const name = String(new FormData(formEl).get('name') ?? '');
    setBusy(true);
    setMessage(null);
    setFieldError(undefined);
    setCopied(false);
    try {
      const r = await createPipelineToken({ projectId, name });
      if (!r.ok) {
        setFieldError(r.fields?.name);
        setMessage({ kind: 'problem', text: r.error });
        return;
      }
      setCreated({ name: r.data.name, secret: r.data.secret });
      formEl.reset();
      router.refresh();
      requestAnimationFrame(() => secretRef.current?.select());
    } catch {
      setMessage({ kind: 'problem', text: 'The token could not be created. Check your connection and try again.' });
    } finally {
      setBusy(false);
    }
  }

  async function copy() {
    if (!created) return;
    try {
      await navigator.clipboard.writeText(created.secret);
      setCopied(true);
    } catch {
      secretRef.current?.select();
      setMessage({ kind: 'problem', text: 'Copying was blocked by the browser. The token is selected: press Ctrl+C (or ⌘C) to copy it.' });
    }
  }

  async function revoke(token: TokenRow) {
    setBusy(true);
    setMessage(null);
    try {
      const r = await revokePipelineToken({ tokenId: token.id });
      if (!r.ok) setMessage({ kind: 'problem', text: r.error });
      else {
        setMessage({ kind: 'done', text: `The token “${token.name}” (${token.prefix}…) was revoked. Calls with it are refused from now on.` });
        router.refresh();
      }
    } catch {
      setMessage({ kind: 'problem', text: 'The change could not be sent. Check your connection and try again.' });
    } finally {
      setBusy(false);
      setConfirming(null);
    }
  }

  const live = tokens.filter((t) => t.revokedAt === null);
  const revoked = tokens.filter((t) => t.revokedAt !== null);

  return (
    <section aria-labelledby={headingId} className="space-y-4 rounded border border-slate-300 bg-white p-4">
      <h2 id={headingId} className="text-lg font-semibold">
        Pipeline tokens
      </h2>
      <p className="text-sm text-slate-700">
        A token lets a script add or update samples and read labels and revisions of this project only, through the API under{' '}
        <code>/api/v1/projects/{projectId}/…</code> with the header <code>Authorization: Bearer &lt;token&gt;</code>. It acts for the lead who
        created it and stops working if that person is no longer a lead.
      </p>
      {message ? <Notice kind={message.kind}>{message.text}</Notice> : null}

      <form onSubmit={onCreate} noValidate className="flex flex-wrap items-end gap-3">
        <Field
          className="min-w-64 flex-1 space-y-1"
          label="Token name"
          name="name"
          maxLength={DATA_LIMITS.tokenName}
          placeholder="What uses it, e.g. nightly embedding job"
          error={fieldError}
          required
        />
        <button type="submit" className={buttonClass} disabled={busy}>
          Create token
        </button>
      </form>

      {created ? (
        <div className="space-y-2 rounded border-2 border-oi-green bg-emerald-50 p-4">
          <h3 className="font-semibold">
            <span aria-hidden="true">✓ </span>New token “{created.name}”
          </h3>
          <p className="text-sm">Copy it now and keep it in your pipeline’s secret store: it is shown only this once and cannot be recovered.</p>
          <div className="flex gap-2">
            <label htmlFor={secretId} className="sr-only">
              Token secret
            </label>
            <input
              id={secretId}
              ref={secretRef}
              readOnly
              value={created.secret}
              className={`${inputClass} font-mono text-sm`}
              onFocus={(e) => e.currentTarget.select()}
            />
            <button type="button" className={secondaryButtonClass} onClick={copy}>
              {copied ? 'Copied' : 'Copy token'}
            </button>
          </div>
          <p role="status" className="text-sm">
            {copied ? 'The token is on your clipboard.' : ''}
          </p>
          <button type="button" className={secondaryButtonClass} onClick={() => setCreated(null)}>
            I have stored it — hide
          </button>
        </div>
      ) : null}

      {live.length === 0 ? (
        <p className="text-sm text-slate-600">No active tokens.</p>
      ) : (
        <table className="w-full border-collapse text-sm">
          <caption className="sr-only">Active tokens</caption>
          <thead>
            <tr className="border-b border-slate-300 text-left">
              <th scope="col" className="py-2 pr-4 font-semibold">Name</th>
              <th scope="col" className="py-2 pr-4 font-semibold">Starts with</th>
              <th scope="col" className="py-2 pr-4 font-semibold">Created</th>
              <th scope="col" className="py-2 pr-4 font-semibold">Last used</th>
              <th scope="col" className="py-2 font-semibold">Revoke</th>
            </tr>
          </thead>
          <tbody>
            {live.map((t) => (
              <tr key={t.id} className="border-b border-slate-200 align-top">
                <td className="py-2 pr-4">{t.name}</td>
                <td className="py-2 pr-4 font-mono">{t.prefix}…</td>
                <td className="py-2 pr-4">
                  {when(t.createdAt)} by {t.createdBy}
                </td>
                <td className="py-2 pr-4">{when(t.lastUsedAt)}</td>
                <td className="py-2">
                  {confirming === t.id ? (
                    <span className="flex flex-wrap gap-2">
                      <button type="button" className={dangerButtonClass} disabled={busy} onClick={() => revoke(t)}>
                        Yes, revoke “{t.name}”
                      </button>
                      <button type="button" className={secondaryButtonClass} onClick={() => setConfirming(null)}>
                        Keep it
                      </button>
                    </span>
                  ) : (
                    <button type="button" className={dangerButtonClass} disabled={busy} onClick={() => setConfirming(t.id)}>
                      Revoke…
                    </button>
                  )}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
      )}
      {revoked.length > 0 ? (
        <details className="text-sm">
          <summary className="cursor-pointer">Revoked tokens ({revoked.length})</summary>
          <ul className="mt-2 list-disc space-y-1 pl-5 text-slate-700">
            {revoked.map((t) => (
              <li key={t.id}>
                {t.name} (<span className="font-mono">{t.prefix}…</span>), revoked {when(t.revokedAt)}; last used {when(t.lastUsedAt)}
              </li>
            ))}
          </ul>
        </details>
      ) : null}
    </section>
  );
}

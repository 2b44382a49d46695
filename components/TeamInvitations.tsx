'use client';

import { useRouter } from 'next/navigation';
import { useRef, useState, type FormEvent } from 'react';
import { createInvitation } from '@/app/actions/create-invitation';
import { revokeInvitation } from '@/app/actions/revoke-invitation';
import {
  DEFAULT_INVITATION_LIFETIME_HOURS,
  INVITATION_LIFETIMES_HOURS,
  LIMITS,
  ROLE_LABEL,
  ROLE_SUMMARY,
  ROLES,
  type Role,
} from '@/lib/domain';
import { buttonClass, dangerButtonClass, Field, inputClass, Notice, secondaryButtonClass } from './form-parts';

export type PendingInvitationView = { id: string; role: Role; label: string | null; expiresLabel: string; createdByName: string };

type Props = { teamId: string; teamName: string; pending: PendingInvitationView[]; canManage: boolean };

const LIFETIME_LABEL: Record<number, string> = { 24: '1 day', 72: '3 days', 168: '7 days' };

/** Pending invitations; leads create links (shown once, to copy) and revoke them. */
export function TeamInvitations({ teamId, teamName, pending, canManage }: Props) {
  const router = useRouter();
  const [message, setMessage] = useState<{ kind: 'problem' | 'done'; text: string } | null>(null);
  const [fields, setFields] = useState<Record<string, string>>({});
  const [created, setCreated] = useState<{ link: string; role: Role; expires: string } | null>(null);
  const [copied, setCopied] = useState(false);
  const [busy, setBusy] = useState(false);
  const linkRef = useRef<HTMLInputElement>(null);

  async function onCreate(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const formEl = event.currentTarget;
    const form = new FormData(formEl);
    const role = String(form.get('role') ?? 'reviewer');
    const expiresInHours = Number(form.get('expiresInHours') ?? DEFAULT_INVITATION_LIFETIME_HOURS);
    const label = String(form.get('label') ?? '');
    setBusy(true);
    setMessage(null);
    setFields({});
    setCopied(false);
    try {
      const r = await createInvitation({ teamId, role, expiresInHours, label: label === '' ? undefined : label });
      if (!r.ok) {
        setMessage({ kind: 'problem', text: r.error });
        setFields(r.fields ?? {});
        return;
      }
      setCreated({
        link: `${window.location.origin}/invite/${r.data.token}`,
        role: r.data.role,
        expires: new Date(r.data.expiresAt).toLocaleString(),
      });
      formEl.reset();
      router.refresh();
      requestAnimationFrame(() => linkRef.current?.select());
    } catch {
      setMessage({ kind: 'problem', text: 'The invitation could not be created. Check your connection and try again.' });
    } finally {
      setBusy(false);
    }
  }

  async function copy() {
    if (!created) return;
    try {
      await navigator.clipboard.writeText(created.link);
      setCopied(true);
    } catch {
      linkRef.current?.select();
      setMessage({ kind: 'problem', text: 'Copying was blocked by the browser. The link is selected: press Ctrl+C (or ⌘C) to copy it.' });
    }
  }

  async function revoke(inv: PendingInvitationView) {
    setBusy(true);
    setMessage(null);
    try {
      const r = await revokeInvitation({ invitationId: inv.id });
      if (!r.ok) setMessage({ kind: 'problem', text: r.error });
      else {
        setMessage({ kind: 'done', text: `The ${ROLE_LABEL[inv.role].toLowerCase()} invitation${inv.label ? ` for ${inv.label}` : ''} was revoked.` });
        router.refresh();
      }
    } catch {
      setMessage({ kind: 'problem', text: 'The change could not be sent. Check your connection and try again.' });
    } finally {
      setBusy(false);
    }
  }

  return (
    <div className="space-y-4">
      {message ? <Notice kind={message.kind}>{message.text}</Notice> : null}

      {canManage ? (
        <form onSubmit={onCreate} noValidate className="space-y-3 rounded border border-slate-300 bg-white p-4" aria-labelledby="invite-heading">
          <h3 id="invite-heading" className="font-semibold">
            Invite someone to {teamName}
          </h3>
          <p className="text-sm text-slate-600">
            You get a link to pass on yourself (chat, phone, in person). It works once and stops working when it expires or when you
            revoke it.
          </p>
          <div className="flex flex-wrap gap-4">
            <div className="space-y-1">
              <label htmlFor="invite-role" className="block text-sm font-medium">
                Role
              </label>
              <select id="invite-role" name="role" defaultValue="reviewer" className={`${inputClass} w-auto`} aria-describedby="invite-role-help">
                {ROLES.map((r) => (
                  <option key={r} value={r}>
                    {ROLE_LABEL[r]}
                  </option>
                ))}
              </select>
            </div>
            <div className="space-y-1">
              <label htmlFor="invite-lifetime" className="block text-sm font-medium">
                Link valid for
              </label>
              <select id="invite-lifetime" name="expiresInHours" defaultValue={String(DEFAULT_INVITATION_LIFETIME_HOURS)} className={`${inputClass} w-auto`}>
                {INVITATION_LIFETIMES_HOURS.map((h) => (
                  <option key={h} value={String(h)}>
                    {LIFETIME_LABEL[h]}
                  </option>
                ))}
              </select>
            </div>
            <Field
              className="min-w-64 flex-1 space-y-1"
              label="Note (optional)"
              name="label"
              maxLength={LIMITS.invitationLabel}
              placeholder="Who it is for"
              error={fields.label}
            />
          </div>
          <ul id="invite-role-help" className="list-disc pl-5 text-sm text-slate-600">
            {ROLES.map((r) => (
              <li key={r}>
                <strong>{ROLE_LABEL[r]}</strong>: {ROLE_SUMMARY[r]}
              </li>
            ))}
          </ul>
          <button type="submit" className={buttonClass} disabled={busy}>
            Create invitation link
          </button>
        </form>
      ) : null}

      {created ? (
        <section aria-labelledby="new-link-heading" className="space-y-2 rounded border-2 border-oi-green bg-emerald-50 p-4">
          <h3 id="new-link-heading" className="font-semibold">
            <span aria-hidden="true">✓ </span>New {ROLE_LABEL[created.role].toLowerCase()} invitation link
          </h3>
          <p className="text-sm">
            Copy it now: for safety it is shown only this once. It works for one person, until {created.expires}.
          </p>
          <div className="flex gap-2">
            <label htmlFor="invitation-link" className="sr-only">
              Invitation link
            </label>
            <input id="invitation-link" ref={linkRef} readOnly value={created.link} className={`${inputClass} font-mono text-sm`} onFocus={(e) => e.currentTarget.select()} />
            <button type="button" className={secondaryButtonClass} onClick={copy}>
              {copied ? 'Copied' : 'Copy link'}
            </button>
          </div>
          <p role="status" className="text-sm">
            {copied ? 'The link is on your clipboard.' : ''}
          </p>
        </section>
      ) : null}

      <section aria-labelledby="pending-heading" className="space-y-2">
        <h3 id="pending-heading" className="font-semibold">
          Pending invitations
        </h3>
        {pending.length === 0 ? (
          <p className="text-sm text-slate-600">No invitations are waiting to be used.</p>
        ) : (
          <table className="w-full border-collapse text-sm">
            <thead>
              <tr className="border-b border-slate-300 text-left">
                <th scope="col" className="py-2 pr-4 font-semibold">Note</th>
                <th scope="col" className="py-2 pr-4 font-semibold">Role</th>
                <th scope="col" className="py-2 pr-4 font-semibold">Valid until</th>
                <th scope="col" className="py-2 pr-4 font-semibold">Created by</th>
                {canManage ? <th scope="col" className="py-2 font-semibold">Revoke</th> : null}
              </tr>
            </thead>
            <tbody>
              {pending.map((inv) => (
                <tr key={inv.id} className="border-b border-slate-200">
                  <td className="py-2 pr-4">{inv.label ?? <span className="text-slate-500">—</span>}</td>
                  <td className="py-2 pr-4">{ROLE_LABEL[inv.role]}</td>
                  <td className="py-2 pr-4">{inv.expiresLabel}</td>
                  <td className="py-2 pr-4">{inv.createdByName}</td>
                  {canManage ? (
                    <td className="py-2">
                      <button
                        type="button"
                        className={dangerButtonClass}
                        disabled={busy}
                        onClick={() => revoke(inv)}
                        aria-label={`Revoke the ${ROLE_LABEL[inv.role].toLowerCase()} invitation${inv.label ? ` for ${inv.label}` : ''}`}
                      >
                        Revoke
                      </button>
                    </td>
                  ) : null}
                </tr>
              ))}
            </tbody>
          </table>
        )}
      </section>
    </div>
  );
}

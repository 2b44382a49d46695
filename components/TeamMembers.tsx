'use client';

import { useRouter } from 'next/navigation';
import { useState } from 'react';
import { changeRole } from '@/app/actions/change-role';
import { removeMember } from '@/app/actions/remove-member';
import { ROLE_LABEL, ROLES, type Role } from '@/lib/domain';
import { dangerButtonClass, inputClass, Notice, secondaryButtonClass } from './form-parts';

export type MemberView = { membershipId: string; userId: string; name: string; email: string; role: Role; joinedAt: string };

type Props = { teamName: string; members: MemberView[]; canManage: boolean; currentUserId: string };

/** Members and roles. Leads change roles and remove members; others see the list. */
export function TeamMembers({ teamName, members, canManage, currentUserId }: Props) {
  const router = useRouter();
  const [message, setMessage] = useState<{ kind: 'problem' | 'done'; text: string } | null>(null);
  const [busy, setBusy] = useState<string | null>(null);
  const [confirming, setConfirming] = useState<string | null>(null);
  const [chosen, setChosen] = useState<Record<string, Role>>({});

  async function applyRole(m: MemberView) {
    const role = chosen[m.membershipId] ?? m.role;
    if (role === m.role) {
      setMessage({ kind: 'done', text: `${m.name} is already ${ROLE_LABEL[role].toLowerCase()}.` });
      return;
    }
    setBusy(m.membershipId);
    setMessage(null);
    try {
      const r = await changeRole({ membershipId: m.membershipId, role });
      if (!r.ok) setMessage({ kind: 'problem', text: r.error });
      else {
        setMessage({ kind: 'done', text: `${m.name} is now ${ROLE_LABEL[role].toLowerCase()}.` });
        router.refresh();
      }
    } catch {
      setMessage({ kind: 'problem', text: 'The change could not be sent. Check your connection and try again.' });
    } finally {
      setBusy(null);
    }
  }

  async function remove(m: MemberView) {
    setBusy(m.membershipId);
    setMessage(null);
    try {
      const r = await removeMember({ membershipId: m.membershipId });
      if (!r.ok) setMessage({ kind: 'problem', text: r.error });
      else {
        setMessage({ kind: 'done', text: `${m.name} was removed from ${teamName}.` });
        setConfirming(null);
        router.refresh();
      }
    } catch {
      setMessage({ kind: 'problem', text: 'The change could not be sent. Check your connection and try again.' });
    } finally {
      setBusy(null);
    }
  }

  return (
    <div className="space-y-3">
      {message ? <Notice kind={message.kind}>{message.text}</Notice> : null}
      <table className="w-full border-collapse text-sm">
        <caption className="sr-only">Members of {teamName}</caption>
        <thead>
          <tr className="border-b border-slate-300 text-left">
            <th scope="col" className="py-2 pr-4 font-semibold">Name</th>
            <th scope="col" className="py-2 pr-4 font-semibold">Email</th>
            <th scope="col" className="py-2 pr-4 font-semibold">Role</th>
            {canManage ? <th scope="col" className="py-2 font-semibold">Changes</th> : null}
          </tr>
        </thead>
        <tbody>
          {members.map((m) => (
            <tr key={m.membershipId} className="border-b border-slate-200 align-top" data-testid={`member-${m.email}`}>
              <td className="py-2 pr-4">
                {m.name}
                {m.userId === currentUserId ? <span className="ml-1 text-slate-600">(you)</span> : null}
              </td>
              <td className="py-2 pr-4 break-all">{m.email}</td>
              <td className="py-2 pr-4">
                {canManage ? (
                  <div className="flex flex-wrap items-center gap-2">
                    <select
                      aria-label={`Role of ${m.name}`}
                      className={`${inputClass} w-auto py-1`}
                      value={chosen[m.membershipId] ?? m.role}
                      onChange={(e) => setChosen((c) => ({ ...c, [m.membershipId]: e.target.value as Role }))}
                    >
                      {ROLES.map((r) => (
                        <option key={r} value={r}>
                          {ROLE_LABEL[r]}
                        </option>
                      ))}
                    </select>
                    <button
                      type="button"
                      className={secondaryButtonClass}
                      disabled={busy !== null}
                      onClick={() => applyRole(m)}
                      aria-label={`Apply role for ${m.name}`}
                    >
                      Apply
                    </button>
                  </div>
                ) : (
                  ROLE_LABEL[m.role]
                )}
              </td>
              {canManage ? (
                <td className="py-2">
                  {confirming === m.membershipId ? (
                    <div className="flex flex-wrap items-center gap-2" role="group" aria-label={`Confirm removing ${m.name}`}>
                      <span>Remove {m.name}?</span>
                      <button type="button" className={dangerButtonClass} disabled={busy !== null} onClick={() => remove(m)}>
                        Yes, remove
                      </button>
                      <button type="button" className={secondaryButtonClass} onClick={() => setConfirming(null)}>
                        Keep
                      </button>
                    </div>
                  ) : (
                    <button
                      type="button"
                      className={dangerButtonClass}
                      disabled={busy !== null}
                      onClick={() => setConfirming(m.membershipId)}
                      aria-label={`Remove ${m.name} from the team`}
                    >
                      Remove
                    </button>
                  )}
                </td>
              ) : null}
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}

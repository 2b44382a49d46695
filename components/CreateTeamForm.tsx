'use client';

import { useRouter } from 'next/navigation';
import { useState, type FormEvent } from 'react';
import { createTeam } from '@/app/actions/create-team';
import { LIMITS } from '@/lib/domain';
import { buttonClass, Field, Notice } from './form-parts';

/** Starts a new team with the signed-in person as its lead; it becomes their current team. */
export function CreateTeamForm() {
  const router = useRouter();
  const [error, setError] = useState<string | null>(null);
  const [fields, setFields] = useState<Record<string, string>>({});
  const [busy, setBusy] = useState(false);

  async function onSubmit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const formEl = event.currentTarget;
    const name = String(new FormData(formEl).get('name') ?? '');
    setBusy(true);
    setError(null);
    setFields({});
    try {
      const r = await createTeam({ name });
      if (!r.ok) {
        setError(r.error);
        setFields(r.fields ?? {});
        return;
      }
      formEl.reset();
      router.push('/team');
      router.refresh();
    } catch {
      setError('The team could not be created. Check your connection and try again.');
    } finally {
      setBusy(false);
    }
  }

  return (
    <form onSubmit={onSubmit} noValidate className="space-y-3" aria-labelledby="new-team-heading">
      <h2 id="new-team-heading" className="text-lg font-semibold">
        Start a new team
      </h2>
      <p className="text-sm text-slate-600">You become its lead and can invite others. Your other teams stay as they are.</p>
      {error ? <Notice kind="problem">{error}</Notice> : null}
      <Field label="New team name" name="name" required maxLength={LIMITS.teamName} error={fields.name} />
      <button type="submit" className={buttonClass} disabled={busy}>
        {busy ? 'Creating…' : 'Create team'}
      </button>
    </form>
  );
}

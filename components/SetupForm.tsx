'use client';

import { signIn } from 'next-auth/react';
import { useRouter } from 'next/navigation';
import { useState, type FormEvent } from 'react';
import { completeSetup } from '@/app/actions/complete-setup';
import { LIMITS, PASSWORD_HINT, SIGN_IN_MESSAGES } from '@/lib/domain';
import { buttonClass, Field, Notice, PasswordField } from './form-parts';

/** First run: the first account and its team. */
export function SetupForm() {
  const router = useRouter();
  const [error, setError] = useState<string | null>(null);
  const [fields, setFields] = useState<Record<string, string>>({});
  const [busy, setBusy] = useState(false);

  async function onSubmit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const input = {
      teamName: String(form.get('teamName') ?? ''),
      name: String(form.get('name') ?? ''),
      email: String(form.get('email') ?? ''),
      password: String(form.get('password') ?? ''),
    };
    setBusy(true);
    setError(null);
    setFields({});
    try {
      const result = await completeSetup(input);
      if (!result.ok) {
        setError(result.error);
        setFields(result.fields ?? {});
        return;
      }
      const signedIn = await signIn('credentials', { redirect: false, email: result.data.email, password: input.password });
      router.replace(signedIn && !signedIn.error ? '/' : '/signin');
      router.refresh();
    } catch {
      setError(SIGN_IN_MESSAGES.failed);
    } finally {
      setBusy(false);
    }
  }

  return (
    <form onSubmit={onSubmit} noValidate className="space-y-4">
      {error ? <Notice kind="problem">{error}</Notice> : null}
      <Field label="Team name" name="teamName" required maxLength={LIMITS.teamName} autoComplete="organization" error={fields.teamName} />
      <Field label="Your name" name="name" required maxLength={LIMITS.personName} autoComplete="name" error={fields.name} />
      <Field label="Email address" name="email" type="email" required maxLength={LIMITS.email} autoComplete="username" error={fields.email} />
      <PasswordField
        label="Password"
        name="password"
        required
        maxLength={LIMITS.passwordWire}
        autoComplete="new-password"
        hint={PASSWORD_HINT}
        error={fields.password}
      />
      <button type="submit" className={buttonClass} disabled={busy}>
        {busy ? 'Setting up…' : 'Create account and team'}
      </button>
    </form>
  );
}

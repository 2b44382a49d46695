'use client';

import type { FormEvent } from 'react';
import { completeSetup } from '@/app/actions/complete-setup';
import { LIMITS, PASSWORD_HINT } from '@/lib/domain';
import { buttonClass, Field, Notice, PasswordField } from './form-parts';
import { useAccountCreation } from './useAccountCreation';

/** First run: the first account and its team. */
export function SetupForm() {
  const { error, fields, busy, createAndSignIn } = useAccountCreation();

  async function onSubmit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const input = {
      teamName: String(form.get('teamName') ?? ''),
      name: String(form.get('name') ?? ''),
      email: String(form.get('email') ?? ''),
      password: String(form.get('password') ?? ''),
    };
    await createAndSignIn(() => completeSetup(input), input.password);
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

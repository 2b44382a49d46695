'use client';

import Link from 'next/link';
import type { FormEvent } from 'react';
import { acceptInvitation } from '@/app/actions/accept-invitation';
import { signUp } from '@/app/actions/sign-up';
import { LIMITS, PASSWORD_HINT, ROLE_LABEL, SIGN_IN_MESSAGES, type Role } from '@/lib/domain';
import { buttonClass, Field, Notice, PasswordField } from './form-parts';
import { useAccountCreation } from './useAccountCreation';

type Props = {
  token: string;
  teamName: string;
  role: Role;
  /** The signed-in person, when there is one. */
  signedInAs: { name: string; email: string } | null;
};

/** Joining a team from an invitation link: with the signed-in account, or with a new one. */
export function InvitationAccept({ token, teamName, role, signedInAs }: Props) {
  const { error, setError, fields, busy, setBusy, createAndSignIn, router } = useAccountCreation();

  async function join() {
    setBusy(true);
    setError(null);
    try {
      const result = await acceptInvitation({ token });
      if (!result.ok) {
        setError(result.error);
        return;
      }
      router.replace('/');
      router.refresh();
    } catch {
      setError(SIGN_IN_MESSAGES.failed);
    } finally {
      setBusy(false);
    }
  }

  async function createAccount(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const input = {
      token,
      name: String(form.get('name') ?? ''),
      email: String(form.get('email') ?? ''),
      password: String(form.get('password') ?? ''),
    };
    await createAndSignIn(() => signUp(input), input.password);
  }

  if (signedInAs) {
    return (
      <div className="space-y-4">
        {error ? <Notice kind="problem">{error}</Notice> : null}
        <p>
          You are signed in as <strong>{signedInAs.name}</strong> ({signedInAs.email}).
        </p>
        <button type="button" className={buttonClass} disabled={busy} onClick={join}>
          {busy ? 'Joining…' : `Join ${teamName} as ${ROLE_LABEL[role].toLowerCase()}`}
        </button>
      </div>
    );
  }

  return (
    <div className="space-y-6">
      <form onSubmit={createAccount} noValidate className="space-y-4" aria-labelledby="new-account-heading">
        <h2 id="new-account-heading" className="text-lg font-semibold">
          Create your account
        </h2>
        {error ? <Notice kind="problem">{error}</Notice> : null}
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
          {busy ? 'Creating account…' : `Create account and join ${teamName}`}
        </button>
      </form>
      <p className="text-sm">
        Already have an account?{' '}
        <Link className="text-oi-blue underline" href={`/signin?callbackUrl=${encodeURIComponent(`/invite/${token}`)}`}>
          Sign in first
        </Link>
        , then come back to this link.
      </p>
    </div>
  );
}

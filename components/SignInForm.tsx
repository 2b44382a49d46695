'use client';

import { signIn } from 'next-auth/react';
import { useRouter } from 'next/navigation';
import { useState, type FormEvent } from 'react';
import { LIMITS, SIGN_IN_MESSAGES, signInErrorMessage } from '@/lib/domain';
import { buttonClass, Field, Notice, PasswordField } from './form-parts';

/** Email and password, posted to next-auth's credentials endpoint (CSRF-checked, throttled). */
export function SignInForm({ callbackUrl, initialError }: { callbackUrl: string; initialError?: string }) {
  const router = useRouter();
  const [error, setError] = useState<string | null>(initialError ?? null);
  const [busy, setBusy] = useState(false);

  async function onSubmit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const email = String(form.get('email') ?? '').trim();
    const password = String(form.get('password') ?? '');
    if (!email || !password) {
      setError(SIGN_IN_MESSAGES.missing);
      return;
    }
    setBusy(true);
    setError(null);
    try {
      const result = await signIn('credentials', { redirect: false, email, password });
      if (!result || result.error) {
        setError(signInErrorMessage(result?.error));
        return;
      }
      router.replace(callbackUrl);
      router.refresh();
    } catch {
      setError(SIGN_IN_MESSAGES.failed);
    } finally {
      setBusy(false);
    }
  }

  return (
    <form onSubmit={onSubmit} noValidate className="space-y-4" aria-describedby={error ? 'signin-error' : undefined}>
      {error ? (
        <div id="signin-error">
          <Notice kind="problem">{error}</Notice>
        </div>
      ) : null}
      <Field label="Email address" name="email" type="email" autoComplete="username" required maxLength={LIMITS.email} />
      <PasswordField label="Password" name="password" autoComplete="current-password" required maxLength={LIMITS.passwordWire} />
      <button type="submit" className={buttonClass} disabled={busy}>
        {busy ? 'Signing in…' : 'Sign in'}
      </button>
    </form>
  );
}

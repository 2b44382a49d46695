'use client';

import { signIn } from 'next-auth/react';
import { useRouter } from 'next/navigation';
import { useState } from 'react';
import { SIGN_IN_MESSAGES, type ActionResult } from '@/lib/domain';

/**
 * State and submit step shared by the forms that create an account (first-run set-up, joining
 * from an invitation): run the action, show its message and per-field problems, then sign the new
 * account in and go home — or to the sign-in page if that sign-in does not go through.
 */
export function useAccountCreation() {
  const router = useRouter();
  const [error, setError] = useState<string | null>(null);
  const [fields, setFields] = useState<Record<string, string>>({});
  const [busy, setBusy] = useState(false);

  async function createAndSignIn<T extends { email: string }>(create: () => Promise<ActionResult<T>>, password: string) {
    setBusy(true);
    setError(null);
    setFields({});
    try {
      const result = await create();
      if (!result.ok) {
        setError(result.error);
        setFields(result.fields ?? {});
        return;
      }
      const signedIn = await signIn('credentials', { redirect: false, email: result.data.email, password });
      router.replace(signedIn && !signedIn.error ? '/' : '/signin');
      router.refresh();
    } catch {
      setError(SIGN_IN_MESSAGES.failed);
    } finally {
      setBusy(false);
    }
  }

  return { error, setError, fields, busy, setBusy, createAndSignIn, router };
}

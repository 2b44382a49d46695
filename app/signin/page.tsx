import type { Metadata } from 'next';
import { redirect } from 'next/navigation';
import { SignInForm } from '@/components/SignInForm';
import { isFreshInstall } from '@/lib/server/auth/accounts';
import { getSessionUser } from '@/lib/server/auth/session';
import { safeReturnPath } from '@/lib/server/authz/page';
import { db } from '@/lib/server/db';

export const metadata: Metadata = { title: 'Sign in' };
export const dynamic = 'force-dynamic';

type Search = Promise<Record<string, string | string[] | undefined>>;

export default async function SignInPage({ searchParams }: { searchParams: Search }) {
  const sp = await searchParams;
  const callbackUrl = safeReturnPath(Array.isArray(sp.callbackUrl) ? sp.callbackUrl[0] : sp.callbackUrl);
  if (await getSessionUser()) redirect(callbackUrl);
  if (await isFreshInstall(db())) redirect('/setup');
  // next-auth sends people here with ?error=… when its own pages would have been used.
  const initialError = sp.error ? 'Signing in did not work. Enter your email address and password again.' : undefined;
  return (
    <div className="mx-auto max-w-md space-y-6">
      <div className="space-y-1">
        <h1 className="text-2xl font-semibold">Sign in</h1>
        <p className="text-slate-600">Use the email address and password of your Borderline account.</p>
      </div>
      <SignInForm callbackUrl={callbackUrl} initialError={initialError} />
      <p className="text-sm text-slate-600">
        No account yet? Ask a lead of your team for an invitation link.
      </p>
    </div>
  );
}

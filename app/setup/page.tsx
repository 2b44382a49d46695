import type { Metadata } from 'next';
import Link from 'next/link';
import { SetupForm } from '@/components/SetupForm';
import { isFreshInstall } from '@/lib/server/auth/accounts';
import { db } from '@/lib/server/db';

export const metadata: Metadata = { title: 'Set up' };
export const dynamic = 'force-dynamic';

/** First run only: the first person creates their account and team and becomes its lead. */
export default async function SetupPage() {
  if (!(await isFreshInstall(db()))) {
    return (
      <div className="mx-auto max-w-md space-y-4">
        <h1 className="text-2xl font-semibold">Already set up</h1>
        <p>
          This installation already has accounts, so set-up is closed. Sign in, or ask a team lead for an invitation link.
        </p>
        <Link href="/signin" className="font-medium text-oi-blue underline">
          Go to sign-in
        </Link>
      </div>
    );
  }
  return (
    <div className="mx-auto max-w-md space-y-6">
      <div className="space-y-1">
        <h1 className="text-2xl font-semibold">Set up Borderline</h1>
        <p className="text-slate-600">
          Nobody has an account here yet. Create yours and name your team; you will be its lead and can invite the others.
        </p>
      </div>
      <SetupForm />
    </div>
  );
}

import NextAuth from 'next-auth';
import type { NextRequest } from 'next/server';
import { authOptions } from '@/lib/server/auth/options';

// next-auth's endpoint: CSRF token, credentials sign-in (our throttled `authorize`), session,
// sign-out. Registered as "nextAuth" in lib/server/authz/registry.ts.
type Context = { params: Promise<{ nextauth: string[] }> };

async function handler(req: NextRequest, context: Context): Promise<Response> {
  return NextAuth(req, context, authOptions());
}

export { handler as GET, handler as POST };

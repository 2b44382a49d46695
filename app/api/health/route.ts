import { NextResponse } from 'next/server';

/** Liveness: the process is up and serving. Readiness (database reachable) is /api/ready. */
export function GET() {
  return NextResponse.json({ status: 'ok' });
}

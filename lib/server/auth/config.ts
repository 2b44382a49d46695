/**
 * Authentication settings, from the checked environment (lib/server/env.ts):
 *   NEXTAUTH_SECRET            key of the session token (generated into the data dir outside production)
 *   BORDERLINE_SESSION_HOURS   session lifetime in hours, absolute from sign-in (default 8)
 *   BORDERLINE_PROXY_HOPS      reverse proxies in front of the app that append to X-Forwarded-For (default 0)
 */
import { env } from '../env';

export type AuthSettings = {
  secret: string;
  sessionMaxAgeSeconds: number;
  proxyHops: number;
};

export function authSettings(): AuthSettings {
  const e = env();
  return {
    secret: e.NEXTAUTH_SECRET,
    sessionMaxAgeSeconds: e.BORDERLINE_SESSION_HOURS * 3600,
    proxyHops: e.BORDERLINE_PROXY_HOPS,
  };
}

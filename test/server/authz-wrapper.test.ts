// The wrapper's pure pieces: how bad input and internal faults become answers (400 / 413 / 409 /
// 404 / generic 500 without internal text), the cross-site check of route handlers, the client
// address used for throttling, and the return-path filter of the sign-in page.

import { describe, expect, it, vi } from 'vitest';
import { z } from 'zod';
import { CreateInvitationInput, SignUpInput } from '@/lib/domain';
import { clientAddressFromForwardedFor, normalizeAddress } from '@/lib/server/auth/address';
import { failureFromError, isCrossSite, validationFailure } from '@/lib/server/authz/define';
import { ActionError } from '@/lib/server/authz/errors';
import { safeReturnPath } from '@/lib/server/authz/page';

describe('validation answers', () => {
  it('a field over its cap is 413 with the field named; other problems are 400', () => {
    const big = SignUpInput.safeParse({ token: 'x'.repeat(43), name: 'n'.repeat(81), email: 'a@b.co', password: 'p' });
    if (big.success) throw new Error('expected a failure');
    expect(validationFailure(big.error)).toMatchObject({ ok: false, status: 413, error: 'Name is too long (at most 80 characters).' });

    const bad = CreateInvitationInput.safeParse({ teamId: 'abc', role: 'owner' });
    if (bad.success) throw new Error('expected a failure');
    expect(validationFailure(bad.error)).toEqual({
      ok: false,
      status: 400,
      error: 'Choose a role: lead, reviewer or observer.',
      fields: { role: 'Choose a role: lead, reviewer or observer.' },
    });

    const lifetime = CreateInvitationInput.safeParse({ teamId: 'abc', role: 'lead', expiresInHours: 5 });
    if (lifetime.success) throw new Error('expected a failure');
    expect(validationFailure(lifetime.error).error).toBe('Choose how long the link stays valid: 1, 3 or 7 days.');

    const notObject = z.object({ a: z.string() }).safeParse(42);
    if (notObject.success) throw new Error('expected a failure');
    expect(validationFailure(notObject.error)).toMatchObject({ status: 400, error: 'The request was not in the expected form.' });
  });
});

describe('faults become answers without internal details', () => {
  it('maps expected refusals and database conflicts', () => {
    expect(failureFromError('x', new ActionError(409, 'Taken.'))).toEqual({ ok: false, status: 409, error: 'Taken.' });
    // Prisma error codes (reference: Prisma error reference, P2002 unique constraint, P2025
    // record not found, P2034 transaction conflict; recalled from memory).
    expect(failureFromError('x', Object.assign(new Error('Unique constraint failed on email'), { code: 'P2002' }))).toMatchObject({ status: 409 });
    expect(failureFromError('x', Object.assign(new Error('Record to update not found.'), { code: 'P2025' }))).toMatchObject({ status: 404 });
    expect(failureFromError('x', Object.assign(new Error('write conflict'), { code: 'P2034' }))).toMatchObject({ status: 409 });
  });

  it('an unexpected error is logged on the server and answered with a generic message', () => {
    const spy = vi.spyOn(console, 'error').mockImplementation(() => undefined);
    const secret = new Error('connect ECONNREFUSED 10.0.0.5:5432 password=hunter2');
    const r = failureFromError('createTeam', secret);
    expect(r.status).toBe(500);
    expect(r.error).not.toContain('ECONNREFUSED');
    expect(r.error).not.toContain('hunter2');
    expect(JSON.stringify(r)).not.toMatch(/at .*\.ts:\d+/); // no stack frames
    expect(spy).toHaveBeenCalledOnce();
    spy.mockRestore();
  });
});

describe('cross-site check for route handlers', () => {
  const req = (method: string, headers: Record<string, string>) => new Request('http://app.example/api/x', { method, headers });
  it('refuses a state-changing request from another origin', () => {
    expect(isCrossSite(req('POST', { origin: 'https://evil.example', host: 'app.example' }))).toBe(true);
    expect(isCrossSite(req('DELETE', { origin: 'http://app.example.evil.example', host: 'app.example' }))).toBe(true);
    expect(isCrossSite(req('POST', { origin: 'null', host: 'app.example' }))).toBe(true);
  });
  it('lets same-origin, origin-less and read-only requests through', () => {
    expect(isCrossSite(req('POST', { origin: 'http://app.example', host: 'app.example' }))).toBe(false);
    expect(isCrossSite(req('POST', { origin: 'https://app.example', 'x-forwarded-host': 'app.example', host: '127.0.0.1:3000' }))).toBe(false);
    expect(isCrossSite(req('POST', { host: 'app.example' }))).toBe(false);
    expect(isCrossSite(req('GET', { origin: 'https://evil.example', host: 'app.example' }))).toBe(false);
  });
});

describe('client address for throttling', () => {
  it('takes the rightmost entry without proxies, the n-th from the right behind n proxies', () => {
    expect(clientAddressFromForwardedFor('203.0.113.9', 0)).toBe('203.0.113.9');
    expect(clientAddressFromForwardedFor('6.6.6.6, 203.0.113.9', 0)).toBe('203.0.113.9');
    // Behind one appending proxy, a client-supplied first entry is ignored.
    expect(clientAddressFromForwardedFor('6.6.6.6, 203.0.113.9', 1)).toBe('203.0.113.9');
    // Two proxies (CDN, then nginx): "client-supplied, real client, CDN".
    expect(clientAddressFromForwardedFor('6.6.6.6, 203.0.113.9, 198.51.100.1', 2)).toBe('203.0.113.9');
    expect(clientAddressFromForwardedFor(null, 0)).toBe('unknown');
    expect(clientAddressFromForwardedFor('not an address', 0)).toBe('unknown');
  });

  it('normalises ports, IPv4-mapped IPv6, and keys IPv6 by its /64 (RFC 4291 text forms, hand-expanded)', () => {
    expect(normalizeAddress('203.0.113.9:51234')).toBe('203.0.113.9');
    expect(normalizeAddress('::ffff:203.0.113.9')).toBe('203.0.113.9');
    // 2001:db8:85a3::8a2e:370:7334 = 2001:0db8:85a3:0000:0000:8a2e:0370:7334 → first four groups.
    expect(normalizeAddress('2001:db8:85a3::8a2e:370:7334')).toBe('2001:db8:85a3:0::/64');
    expect(normalizeAddress('[2001:DB8:85A3:0:1:2:3:4]:443')).toBe('2001:db8:85a3:0::/64');
    // Two addresses of one /64 share a key; the next /64 does not.
    expect(normalizeAddress('2001:db8:1:2::1')).toBe(normalizeAddress('2001:db8:1:2:ffff::9'));
    expect(normalizeAddress('2001:db8:1:3::1')).not.toBe(normalizeAddress('2001:db8:1:2::1'));
    expect(normalizeAddress('::1')).toBe('0:0:0:0::/64');
  });
});

describe('return path after sign-in', () => {
  it('keeps same-site paths and drops anything that could leave the site', () => {
    expect(safeReturnPath('/team')).toBe('/team');
    expect(safeReturnPath('/invite/abc?x=1')).toBe('/invite/abc?x=1');
    for (const bad of ['https://evil.example/', '//evil.example', '/\\evil.example', 'javascript:alert(1)', '', undefined, ['/team']]) {
      expect(safeReturnPath(bad)).toBe('/');
    }
  });
});

// Invitations and accounts under bad input: expired, reused, revoked and unknown links; tampered,
// foreign and expired session cookies; oversized fields; weak passwords. Each is refused with a
// clear message, no stack trace, and nothing changes in the database.

import { createHash } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { acceptInvitation } from '@/app/actions/accept-invitation';
import { completeSetup } from '@/app/actions/complete-setup';
import { createInvitation } from '@/app/actions/create-invitation';
import { createTeam } from '@/app/actions/create-team';
import { revokeInvitation } from '@/app/actions/revoke-invitation';
import { signUp } from '@/app/actions/sign-up';
import { ACCOUNT_MESSAGES } from '@/lib/server/auth/accounts';
import { PASSWORD_MESSAGES } from '@/lib/server/auth/password-policy';
import { INVITATION_MESSAGES } from '@/lib/server/dal/invitations';
import { snapshot } from './db-harness';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase, type Fixture } from './auth-harness';

const T0 = new Date('2026-05-04T08:00:00.000Z');
const hours = (h: number) => new Date(T0.getTime() + h * 3600_000);
const PASSWORD = 'kelp-forest-lantern-8';

describe('first run: set-up', () => {
  let app: AppDatabase;
  beforeAll(async () => {
    app = await openAppDatabase();
  });
  afterAll(async () => {
    await app.close();
  });

  it('refuses a weak password on a fresh install and creates nothing', async () => {
    const before = await snapshot(app.t);
    const r = await call(contextFor(null), () =>
      completeSetup({ teamName: 'Quayside', name: 'Ines', email: 'ines@quayside.example', password: 'password1' }),
    );
    expect(r).toEqual({ ok: false, status: 400, error: PASSWORD_MESSAGES.common, fields: { password: PASSWORD_MESSAGES.common } });
    expect(await snapshot(app.t)).toEqual(before);
  });

  it('creates the first account and its team with the account as lead', async () => {
    const r = await call(contextFor(null), () =>
      completeSetup({ teamName: ' Quayside  Support ', name: 'Ines', email: 'Ines@Quayside.example', password: PASSWORD }),
    );
    expect(r).toMatchObject({ ok: true, data: { email: 'ines@quayside.example' } });
    const user = await app.client.user.findUniqueOrThrow({ where: { email: 'ines@quayside.example' }, include: { memberships: { include: { team: true } } } });
    expect(user.memberships.map((m) => [m.team.name, m.role])).toEqual([['Quayside Support', 'lead']]);
    expect(user.passwordHash.startsWith('$argon2id$')).toBe(true);
    const actions = (await app.client.auditEvent.findMany({ orderBy: { id: 'asc' } })).map((e) => e.action);
    expect(actions).toEqual(['auth.account-created', 'team.created', 'member.added']);
  });

  it('refuses to run again once an account exists (409, unchanged)', async () => {
    const before = await snapshot(app.t);
    const r = await call(contextFor(null), () =>
      completeSetup({ teamName: 'Takeover', name: 'Mallory', email: 'mallory@example.org', password: PASSWORD }),
    );
    expect(r).toEqual({ ok: false, status: 409, error: ACCOUNT_MESSAGES.alreadySetUp });
    expect(await snapshot(app.t)).toEqual(before);
  });
});

describe('invitation links', () => {
  let app: AppDatabase;
  let f: Fixture;
  let lead: string;
  let outsider: string;

  beforeAll(async () => {
    app = await openAppDatabase();
    f = await buildFixture(app.client, T0);
    lead = await sessionFor(f.leadA);
    outsider = await sessionFor(f.leadB);
  });
  afterAll(async () => {
    await app.close();
  });

  const at = (now: Date, cookie: string | null = null) => contextFor(cookie, { now });
  async function invite(role: 'lead' | 'reviewer' | 'observer', expiresInHours: 24 | 72 | 168 = 24) {
    const r = await call(at(T0, lead), () => createInvitation({ teamId: f.teamA, role, expiresInHours }));
    if (!r.ok) throw new Error(r.error);
    return r.data;
  }
  async function expectUnchanged<T>(run: () => Promise<T>): Promise<T> {
    const before = await snapshot(app.t);
    const result = await run();
    expect(await snapshot(app.t)).toEqual(before);
    return result;
  }

  it('stores only a hash of the link secret', async () => {
    const inv = await invite('reviewer');
    expect(inv.token).toMatch(/^[A-Za-z0-9_-]{43}$/); // 32 random bytes, base64url
    const row = await app.client.invitation.findUniqueOrThrow({ where: { id: inv.id } });
    // reference: SHA-256 (FIPS 180-4) via node:crypto, computed here independently
    expect(row.tokenHash).toBe(createHash('sha256').update(inv.token).digest('hex'));
    const all = JSON.stringify(await snapshot(app.t));
    expect(all.includes(inv.token)).toBe(false);
  });

  it('a new account joins through the link, once; the reused link is refused', async () => {
    const inv = await invite('reviewer');
    const ok = await call(at(hours(1)), () => signUp({ token: inv.token, name: 'Nell Nakamura', email: 'nell@pier-nine.example', password: PASSWORD }));
    expect(ok).toEqual({ ok: true, data: { email: 'nell@pier-nine.example', teamName: 'Pier Nine', role: 'reviewer' } });
    const nell = await app.client.user.findUniqueOrThrow({ where: { email: 'nell@pier-nine.example' }, include: { memberships: true } });
    expect(nell.memberships.map((m) => [m.teamId, m.role])).toEqual([[f.teamA, 'reviewer']]);
    expect(nell.lastTeamId).toBe(f.teamA);

    const again = await expectUnchanged(() =>
      call(at(hours(2)), () => signUp({ token: inv.token, name: 'Second', email: 'second@pier-nine.example', password: PASSWORD })),
    );
    expect(again).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.used });
    const reuseSignedIn = await expectUnchanged(() => call(at(hours(2), outsider), () => acceptInvitation({ token: inv.token })));
    expect(reuseSignedIn).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.used });
  });

  it('an expired link is refused (24 h link used at 24 h 1 s)', async () => {
    const inv = await invite('observer', 24);
    const late = new Date(T0.getTime() + 24 * 3600_000 + 1000);
    const r = await expectUnchanged(() =>
      call(at(late), () => signUp({ token: inv.token, name: 'Late Larry', email: 'larry@example.org', password: PASSWORD })),
    );
    expect(r).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.expired });
    const r2 = await expectUnchanged(() => call(at(late, outsider), () => acceptInvitation({ token: inv.token })));
    expect(r2).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.expired });
  });

  it('a revoked link is refused', async () => {
    const inv = await invite('reviewer');
    expect(await call(at(hours(1), lead), () => revokeInvitation({ invitationId: inv.id }))).toEqual({ ok: true, data: { id: inv.id } });
    const r = await expectUnchanged(() => call(at(hours(2), outsider), () => acceptInvitation({ token: inv.token })));
    expect(r).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.revoked });
    // Revoking twice says so.
    const twice = await expectUnchanged(() => call(at(hours(2), lead), () => revokeInvitation({ invitationId: inv.id })));
    expect(twice).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.notPending });
  });

  it('an unknown or mangled link is refused', async () => {
    const unknown = await expectUnchanged(() =>
      call(at(hours(1)), () => signUp({ token: 'A'.repeat(43), name: 'Nobody', email: 'nobody@example.org', password: PASSWORD })),
    );
    expect(unknown).toEqual({ ok: false, status: 404, error: INVITATION_MESSAGES.unknown });
    const mangled = await expectUnchanged(() => call(at(hours(1), outsider), () => acceptInvitation({ token: '../../etc/passwd' })));
    expect(mangled).toMatchObject({ ok: false, status: 400, error: 'The invitation link is not valid.' });
  });

  it('accepting while already a member is refused and the link stays usable', async () => {
    const inv = await invite('observer');
    const r = await expectUnchanged(() => call(at(hours(1), lead), () => acceptInvitation({ token: inv.token })));
    expect(r).toEqual({ ok: false, status: 409, error: INVITATION_MESSAGES.alreadyMember('Pier Nine') });
    expect((await app.client.invitation.findUniqueOrThrow({ where: { id: inv.id } })).acceptedAt).toBeNull();
  });

  it('two people racing with one link: exactly one joins', async () => {
    const inv = await invite('reviewer');
    const racers = await Promise.all(
      ['racer1', 'racer2', 'racer3'].map(async (name) => {
        const u = await app.client.user.create({ data: { email: `${name}@example.org`, name, passwordHash: 'x' } });
        return sessionFor(u.id);
      }),
    );
    const results = await Promise.all(racers.map((c) => call(at(hours(1), c), () => acceptInvitation({ token: inv.token }))));
    expect(results.filter((r) => r.ok).length).toBe(1);
    for (const r of results.filter((x) => !x.ok)) expect(r).toMatchObject({ ok: false, status: 409 });
    expect(await app.client.membership.count({ where: { teamId: f.teamA, user: { email: { startsWith: 'racer' } } } })).toBe(1);
  });

  it('a weak password or an oversized field is refused with a clear message and nothing is created', async () => {
    const inv = await invite('reviewer');
    const weak = await expectUnchanged(() =>
      call(at(hours(1)), () => signUp({ token: inv.token, name: 'Wendy', email: 'wendy@example.org', password: 'qwertyuiop' })),
    );
    expect(weak).toEqual({ ok: false, status: 400, error: PASSWORD_MESSAGES.common, fields: { password: PASSWORD_MESSAGES.common } });
    const longName = await expectUnchanged(() =>
      call(at(hours(1)), () => signUp({ token: inv.token, name: 'N'.repeat(10_000), email: 'wendy@example.org', password: PASSWORD })),
    );
    expect(longName).toMatchObject({ ok: false, status: 413, error: 'Name is too long (at most 80 characters).' });
    const longEmail = await expectUnchanged(() =>
      call(at(hours(1)), () => signUp({ token: inv.token, name: 'Wendy', email: `${'w'.repeat(300)}@example.org`, password: PASSWORD })),
    );
    expect(longEmail).toMatchObject({ ok: false, status: 413, error: 'Email address is too long (at most 254 characters).' });
    const notAnObject = await expectUnchanged(() => call(at(hours(1)), () => signUp('drop table')));
    expect(notAnObject).toEqual({ ok: false, status: 400, error: 'The request was not in the expected form.', fields: { _: expect.any(String) } });
    const longTeam = await expectUnchanged(() => call(at(hours(1), lead), () => createTeam({ name: 'T'.repeat(5000) })));
    expect(longTeam).toMatchObject({ ok: false, status: 413, error: 'Team name is too long (at most 80 characters).' });
    // The link is still pending after all that.
    expect((await app.client.invitation.findUniqueOrThrow({ where: { id: inv.id } })).acceptedAt).toBeNull();
  });
});

describe('session cookies', () => {
  let app: AppDatabase;
  let f: Fixture;
  beforeAll(async () => {
    app = await openAppDatabase();
    f = await buildFixture(app.client);
  });
  afterAll(async () => {
    await app.close();
  });

  const tryWith = async (cookie: string | null) =>
    call(contextFor(cookie), () => createInvitation({ teamId: f.teamA, role: 'reviewer', expiresInHours: 24 }));
  const SIGNED_OUT = { ok: false, status: 401, error: 'Sign in to continue.' };

  it('a genuine cookie works (control)', async () => {
    expect(await tryWith(await sessionFor(f.leadA))).toMatchObject({ ok: true });
  });

  it('a tampered cookie is treated as signed out; nothing changes', async () => {
    const good = await sessionFor(f.leadA);
    const before = await snapshot(app.t);
    // Flip one character in each of the five JWE parts (header, key, iv, ciphertext, tag).
    const parts = good.split('.');
    expect(parts).toHaveLength(5);
    for (let i = 0; i < parts.length; i += 1) {
      const p = parts.slice();
      const s = p[i];
      const mid = Math.floor(s.length / 2);
      p[i] = s.slice(0, mid) + (s[mid] === 'A' ? 'B' : 'A') + s.slice(mid + 1);
      expect(await tryWith(p.join('.')), `part ${i}`).toEqual(SIGNED_OUT);
    }
    expect(await tryWith('not-a-token')).toEqual(SIGNED_OUT);
    // An unsigned JWT naming the lead ("alg":"none") is not accepted either.
    const b64 = (o: object) => Buffer.from(JSON.stringify(o)).toString('base64url');
    expect(await tryWith(`${b64({ alg: 'none', typ: 'JWT' })}.${b64({ sub: f.leadA })}.`)).toEqual(SIGNED_OUT);
    expect(await snapshot(app.t)).toEqual(before);
  });

  it('a cookie made with another secret is treated as signed out', async () => {
    const foreign = await sessionFor(f.leadA, { secret: 'another-install-secret-0123456789abcdefghij' });
    expect(await tryWith(foreign)).toEqual(SIGNED_OUT);
  });

  it('sessions expire: past the token expiry, or more than 8 h after sign-in', async () => {
    // Token expiry in the past (next-auth checks exp when decrypting).
    expect(await tryWith(await sessionFor(f.leadA, { maxAgeSeconds: -120 }))).toEqual(SIGNED_OUT);
    // A token re-issued later but carrying a sign-in time 8 h 1 min ago.
    const old = new Date(Date.now() - (8 * 3600 + 60) * 1000);
    expect(await tryWith(await sessionFor(f.leadA, { issuedAt: old }))).toEqual(SIGNED_OUT);
    // 7 h 59 min after sign-in is still fine.
    const recent = new Date(Date.now() - (8 * 3600 - 60) * 1000);
    expect(await tryWith(await sessionFor(f.leadA, { issuedAt: recent }))).toMatchObject({ ok: true });
  });
});

// Sign-in throttling: a burst of guesses is slowed, the back-off is capped so nobody can keep
// another person out for long, and it works per address and per account. Time comes from an
// injected clock (`now`), never from the wall clock. Expected delays are hand-worked from the
// documented rule delay(n) = min(base · 2^(n − free − 1), cap) for n > free (THROTTLE_POLICY in
// lib/server/auth/throttle.ts: account free 5, base 1 s, cap 300 s; address free 20, base 1 s,
// cap 900 s).

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { authenticateCredentials, type SignInOutcome } from '@/lib/server/auth/sign-in';
import { accountKey, backoffDelayMs, decayedFailures, THROTTLE_POLICY } from '@/lib/server/auth/throttle';
import { FIXTURE_PASSWORD, fixtureHash, openAppDatabase, type AppDatabase } from './auth-harness';

const T0 = new Date('2026-03-02T09:00:00.000Z');
const at = (seconds: number) => new Date(T0.getTime() + seconds * 1000);
const WRONG = 'definitely-not-it-42';

describe('back-off arithmetic (pure)', () => {
  it('account rule: free 5, then 1, 2, 4 … s, capped at 300 s (hand-worked)', () => {
    const r = THROTTLE_POLICY.account;
    // n:            1  2  3  4  5  6     7     8     9     10     14       15 (2^9 s = 512 s > 300 s)
    const expected = [0, 0, 0, 0, 0, 1000, 2000, 4000, 8000, 16000];
    expect([1, 2, 3, 4, 5, 6, 7, 8, 9, 10].map((n) => backoffDelayMs(n, r))).toEqual(expected);
    expect(backoffDelayMs(14, r)).toBe(256_000); // 2^8 s
    expect(backoffDelayMs(15, r)).toBe(300_000); // capped
    expect(backoffDelayMs(10_000, r)).toBe(300_000);
  });

  it('address rule: free 20, then 1 s doubling, capped at 900 s (hand-worked)', () => {
    const r = THROTTLE_POLICY.address;
    expect(backoffDelayMs(20, r)).toBe(0);
    expect(backoffDelayMs(21, r)).toBe(1000);
    expect(backoffDelayMs(30, r)).toBe(512_000); // 2^9 s
    expect(backoffDelayMs(31, r)).toBe(900_000); // 2^10 s = 1024 s > 900 s
  });

  it('forgets one failure per decay period (account: 30 min)', () => {
    const r = THROTTLE_POLICY.account;
    // 65 minutes = 2 whole periods of 30 min → 10 − 2 = 8.
    expect(decayedFailures(10, T0, at(65 * 60), r)).toBe(8);
    expect(decayedFailures(3, T0, at(10 * 3600), r)).toBe(0);
    expect(decayedFailures(3, T0, at(29 * 60), r)).toBe(3);
  });
});

describe('throttled sign-in against the database', () => {
  let app: AppDatabase;
  let n = 0;
  /** A fresh real account per test, so tests do not share throttle rows. */
  async function account(): Promise<string> {
    n += 1;
    const email = `sailor${n}@quay.example`;
    await app.client.user.create({ data: { email, name: `Sailor ${n}`, passwordHash: await fixtureHash() } });
    return email;
  }
  const attempt = (email: string, password: string, address: string, now: Date): Promise<SignInOutcome> =>
    authenticateCredentials(app.client, { email, password }, { address, now });
  const kinds = (outcomes: SignInOutcome[]) => outcomes.map((o) => (o.ok ? 'ok' : o.reason));

  beforeAll(async () => {
    app = await openAppDatabase();
    await fixtureHash();
  });
  afterAll(async () => {
    await app.close();
  });

  it('per account: 5 free failures, the 6th is checked and starts a 1 s block, from any address', async () => {
    const email = await account();
    const outcomes: SignInOutcome[] = [];
    for (let i = 1; i <= 6; i += 1) outcomes.push(await attempt(email, WRONG, `203.0.113.${i}`, T0));
    expect(kinds(outcomes)).toEqual(['invalid', 'invalid', 'invalid', 'invalid', 'invalid', 'invalid']);
    // 7th at the same instant from yet another address: refused without checking, 1 s to wait.
    expect(await attempt(email, FIXTURE_PASSWORD, '203.0.113.7', T0)).toEqual({ ok: false, reason: 'throttled', retryAfterSeconds: 1 });
    // After the block the right password works and the account starts afresh.
    expect(await attempt(email, FIXTURE_PASSWORD, '203.0.113.7', at(1))).toMatchObject({ ok: true });
    expect(await app.client.loginThrottle.findUnique({ where: { key: accountKey(email) } })).toBeNull();
  });

  it('a parallel burst cannot slip past the limit: at most 6 of 30 simultaneous guesses are checked', async () => {
    const email = await account();
    const outcomes = await Promise.all(
      Array.from({ length: 30 }, (_, i) => attempt(email, WRONG, `198.18.0.${i + 1}`, T0)),
    );
    const checked = outcomes.filter((o) => !o.ok && o.reason === 'invalid').length;
    expect(checked).toBeGreaterThanOrEqual(1);
    expect(checked).toBeLessThanOrEqual(6);
    expect(outcomes.filter((o) => !o.ok && o.reason === 'throttled').length).toBe(30 - checked);
    // The audit log agrees: no more than 6 password checks happened for this account.
    const user = await app.client.user.findUniqueOrThrow({ where: { email } });
    const wrong = await app.client.auditEvent.count({ where: { action: 'auth.sign-in-failed', userId: user.id, detail: { contains: 'wrong-password' } } });
    expect(wrong).toBe(checked);
  });

  it('the back-off doubles and is capped at 5 minutes (hand-worked sequence)', async () => {
    const email = await account();
    let now = T0;
    let address = 0;
    const next = () => `192.0.2.${(address += 1)}`;
    for (let i = 0; i < 5; i += 1) await attempt(email, WRONG, next(), now); // free ones
    const waits: number[] = [];
    for (let i = 0; i < 12; i += 1) {
      expect((await attempt(email, WRONG, next(), now)).ok).toBe(false);
      const refused = await attempt(email, WRONG, next(), now);
      if (refused.ok || refused.reason !== 'throttled') throw new Error('expected a throttled answer');
      waits.push(refused.retryAfterSeconds);
      now = new Date(now.getTime() + refused.retryAfterSeconds * 1000);
    }
    // failures 6, 7, … 17 → 1, 2, 4, 8, 16, 32, 64, 128, 256 s, then the 300 s cap.
    expect(waits).toEqual([1, 2, 4, 8, 16, 32, 64, 128, 256, 300, 300, 300]);
  });

  it('caps how long a stranger can keep the owner out: 300 s after their last guess', async () => {
    const email = await account();
    let now = T0;
    // A stranger guesses for a long time, always as soon as allowed.
    for (let i = 0; i < 25; i += 1) {
      const r = await attempt(email, WRONG, `100.64.0.${i + 1}`, now);
      if (!r.ok && r.reason === 'throttled') now = new Date(now.getTime() + r.retryAfterSeconds * 1000);
    }
    const lastGuess = await attempt(email, WRONG, '100.64.1.1', now);
    expect(lastGuess).toEqual({ ok: false, reason: 'invalid' });
    // The owner, from their own address: still waiting at +299 s, in at +300 s.
    const owner = '203.0.113.200';
    expect(await attempt(email, FIXTURE_PASSWORD, owner, new Date(now.getTime() + 299_000))).toEqual({
      ok: false,
      reason: 'throttled',
      retryAfterSeconds: 1,
    });
    expect(await attempt(email, FIXTURE_PASSWORD, owner, new Date(now.getTime() + 300_000))).toMatchObject({ ok: true });
  });

  it('attempts refused during a block are not counted and do not extend it', async () => {
    const email = await account();
    for (let i = 0; i < 6; i += 1) await attempt(email, WRONG, `172.16.0.${i + 1}`, T0);
    for (let i = 0; i < 40; i += 1) await attempt(email, WRONG, `172.16.1.${i + 1}`, at(0.5));
    const row = await app.client.loginThrottle.findUniqueOrThrow({ where: { key: accountKey(email) } });
    expect(row.failures).toBe(6);
    expect(row.blockedUntil?.toISOString()).toBe(at(1).toISOString());
  });

  it('per address: 20 free failures across any accounts, then the address itself is slowed', async () => {
    const address = '198.51.100.99';
    const owner = await account();
    const outcomes: SignInOutcome[] = [];
    for (let i = 1; i <= 21; i += 1) outcomes.push(await attempt(`nobody${i}@spray.example`, WRONG, address, T0));
    expect(kinds(outcomes).every((k) => k === 'invalid')).toBe(true);
    // 22nd from that address, even with a real account and its right password: wait 1 s.
    expect(await attempt(owner, FIXTURE_PASSWORD, address, T0)).toEqual({ ok: false, reason: 'throttled', retryAfterSeconds: 1 });
    // The same account from another address is unaffected.
    expect(await attempt(owner, FIXTURE_PASSWORD, '198.51.100.100', T0)).toMatchObject({ ok: true });
  });

  it('unknown and real accounts get the same answers (no account enumeration)', async () => {
    const real = await account();
    const seq = async (email: string, prefix: string) => {
      const out: string[] = [];
      for (let i = 0; i < 8; i += 1) {
        const r = await attempt(email, WRONG, `${prefix}.${i + 1}`, T0);
        out.push(r.ok ? 'ok' : r.reason === 'throttled' ? `throttled:${r.retryAfterSeconds}` : r.reason);
      }
      return out;
    };
    const a = await seq(real, '10.1.0');
    const b = await seq('ghost@quay.example', '10.2.0');
    expect(a).toEqual(b);
    expect(a).toEqual(['invalid', 'invalid', 'invalid', 'invalid', 'invalid', 'invalid', 'throttled:1', 'throttled:1']);
  });

  it('forgets old failures: after 30 quiet minutes one failure is forgotten', async () => {
    const email = await account();
    for (let i = 0; i < 5; i += 1) await attempt(email, WRONG, `10.9.0.${i + 1}`, T0);
    // 31 min later: 5 − 1 = 4 counted, so this failure is the 5th — still free, no block.
    await attempt(email, WRONG, '10.9.0.6', at(31 * 60));
    const row = await app.client.loginThrottle.findUniqueOrThrow({ where: { key: accountKey(email) } });
    expect(row.failures).toBe(5);
    expect(row.blockedUntil).toBeNull();
  });

  it('records sign-ins and failed sign-ins in the audit log, without the typed email of unknown accounts', async () => {
    const email = await account();
    await attempt(email, WRONG, '10.7.0.1', T0);
    await attempt(email, FIXTURE_PASSWORD, '10.7.0.1', T0);
    await attempt('typo-or-password@quay.example', WRONG, '10.7.0.1', T0);
    const user = await app.client.user.findUniqueOrThrow({ where: { email } });
    const mine = await app.client.auditEvent.findMany({ where: { userId: user.id }, orderBy: { id: 'asc' } });
    expect(mine.map((e) => e.action)).toEqual(['auth.sign-in-failed', 'auth.sign-in']);
    expect(JSON.parse(mine[0].detail)).toMatchObject({ reason: 'wrong-password' });
    expect(mine.every((e) => e.address === '10.7.0.1')).toBe(true);
    const unknown = await app.client.auditEvent.findFirstOrThrow({ where: { detail: { contains: 'unknown-account' }, address: '10.7.0.1' } });
    expect(unknown.userId).toBeNull();
    expect(unknown.detail).not.toContain('typo-or-password');
  });
});

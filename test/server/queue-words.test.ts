// The standing-in-words generator. Every expected sentence is worked out by hand from the rule in
// lib/server/queue/words.ts (the arithmetic is written beside each case).
import { describe, expect, it } from 'vitest';
import { describeStanding, fmt, headline, placement } from '@/lib/server/queue/words';

const four = ['account', 'other', 'refund', 'shipping'];

describe('placement', () => {
  it('two classes: position is y·f(x), y = +1 for the second class', () => {
    // hand-worked: classes [no, yes], f = −0.3; label "yes" → y = +1 → p = −0.3, placed with "no"
    expect(placement(['no', 'yes'], [-0.3], 'yes')).toEqual({ position: -0.3, rival: 'no', placedIn: 'no' });
    // label "no" → y = −1 → p = +0.3, rival "yes", placed with "no"
    expect(placement(['no', 'yes'], [-0.3], 'no')).toEqual({ position: 0.3, rival: 'yes', placedIn: 'no' });
  });

  it('several classes: half of (own score − best other score), rival = best other', () => {
    // hand-worked: scores account −0.9, other −0.5, refund 0.10, shipping 0.34; label refund
    // own 0.10, best other shipping 0.34 → (0.10 − 0.34)/2 = −0.12; arg-max shipping
    const p = placement(four, [-0.9, -0.5, 0.1, 0.34], 'refund');
    expect(p.rival).toBe('shipping');
    expect(p.placedIn).toBe('shipping');
    expect(p.position).toBeCloseTo(-0.12, 12);
  });
});

describe('headline', () => {
  it('covers the five regions with the label first in the pair', () => {
    expect(headline(-0.12, 'refund', 'shipping')).toBe('0.12 from the boundary, inside the margin, on the wrong side of refund | shipping');
    expect(headline(-1.4, 'refund', 'other')).toBe('1.40 from the boundary, past the margin, on the wrong side of refund | other');
    expect(headline(-1, 'refund', 'other')).toBe('1.00 from the boundary, past the margin, on the wrong side of refund | other');
    expect(headline(0.004, 'a', 'b')).toBe('on the boundary between a | b');
    expect(headline(-0.004, 'a', 'b')).toBe('on the boundary between a | b');
    expect(headline(0.4, 'account', 'refund')).toBe('0.40 from the boundary, inside the margin, on its own side of account | refund');
    expect(headline(1.851, 'account', 'refund')).toBe('1.85 from the boundary, clear of the margin on its own side of account | refund');
  });

  it('formats without a negative zero', () => {
    expect(fmt(-0.001)).toBe('0.00');
    expect(fmt(2.005)).toBe('2.01'); // 2.005 × 100 evaluates to 200.5 in binary64 (checked in node); Math.round → 201
  });
});

describe('describeStanding', () => {
  it('explains a wrong-side sample that held-out scoring also places elsewhere', () => {
    const w = describeStanding({
      label: 'refund',
      classes: four,
      decisions: [-0.9, -0.5, 0.1, 0.34],
      // held out: refund −0.2, shipping 0.6 → (−0.2 − 0.6)/2 = −0.40, placed with shipping
      oofDecisions: [-1, -0.7, -0.2, 0.6],
      flags: ['wrong-side', 'near-boundary'],
      nearBand: 0.5,
    });
    expect(w.headline).toBe('0.12 from the boundary, inside the margin, on the wrong side of refund | shipping');
    expect(w.details).toEqual([
      'The fitted boundaries place it with shipping, not refund.',
      'Held out of the fit, it lands 0.40 on the wrong side and scores highest for shipping.',
      'It lies within the near-boundary band (±0.50 of a boundary).',
      'Distances are in margin half-widths: the edges of the margin sit at 1 on either side of the boundary.',
    ]);
    expect(w.heldOutPosition).toBeCloseTo(-0.4, 6);
  });

  it('a comfortable sample: own side, clear of the margin, no held-out values', () => {
    const w = describeStanding({ label: 'yes', classes: ['no', 'yes'], decisions: [2.5], oofDecisions: null, flags: [], nearBand: 0.5 });
    expect(w.headline).toBe('2.50 from the boundary, clear of the margin on its own side of yes | no');
    expect(w.details).toHaveLength(1);
    expect(w.placedIn).toBe('yes');
  });

  it('mentions pivots and an inside-margin held-out position', () => {
    // held out: y = −1 (label "no"), f = −0.6 → p = 0.60, own side, inside the margin
    const w = describeStanding({ label: 'no', classes: ['no', 'yes'], decisions: [-1.2], oofDecisions: [-0.6], flags: ['pivot'], nearBand: 0.25 });
    expect(w.details).toEqual([
      'Held out of the fit, it stays on its own side but inside the margin (0.60).',
      'A boundary leans on it: removing it moves the margin width by more than the pivot threshold.',
      'Distances are in margin half-widths: the edges of the margin sit at 1 on either side of the boundary.',
    ]);
  });
});

/**
 * A sample's standing in words, for the reviewer screen.
 *
 * Position: how far the sample sits from the boundary between its own class and its rival, in
 * margin half-widths (the margin's edges are at ±1), positive on its own side.
 * - Two classes: the functional margin y·f(x) of the one boundary; the rival is the other class.
 * - More classes (one-vs-rest): half the multi-class margin, (own score − best other score) / 2,
 *   which equals y·f(x) when the two classes score ±f(x); the rival is the best-scoring other class.
 *
 * Headline, by position p (|p| printed with two decimals):
 *   p ≤ −1        "1.40 from the boundary, past the margin, on the wrong side of refund | shipping"
 *   −1 < p < 0    "0.12 from the boundary, inside the margin, on the wrong side of refund | shipping"
 *   |p| < 0.005   "on the boundary between refund | shipping"
 *   0 < p < 1     "0.40 from the boundary, inside the margin, on its own side of refund | shipping"
 *   p ≥ 1         "1.85 from the boundary, clear of the margin on its own side of refund | shipping"
 * "refund | shipping" always names the sample's current label first.
 */
import type { StandingFlag } from '../../domain-queue';

export interface StandingFacts {
  /** the sample's current label */
  readonly label: string;
  /** the fit's classes, in its boundary order (sorted; two classes → one boundary, y = +1 for classes[1]) */
  readonly classes: readonly string[];
  /** decision value per boundary */
  readonly decisions: readonly number[];
  /** out-of-fold decision value per boundary (null when not computed) */
  readonly oofDecisions: readonly (number | null)[] | null;
  readonly flags: readonly StandingFlag[];
  /** the project's near-boundary band, in margin half-widths */
  readonly nearBand: number;
}

export interface StandingWords {
  readonly headline: string;
  readonly details: readonly string[];
  /** position in margin half-widths, positive on the sample's own side */
  readonly position: number;
  readonly rival: string;
  /** the class the fitted boundaries place the sample in */
  readonly placedIn: string;
  /** held-out position (same units), null when not computed */
  readonly heldOutPosition: number | null;
}

/** Two decimals, no "-0.00". */
export function fmt(v: number): string {
  const r = Math.round(Math.abs(v) * 100) / 100;
  return r.toFixed(2);
}

interface Placement {
  readonly position: number;
  readonly rival: string;
  readonly placedIn: string;
}

/** Position of `label` against its rival, from per-boundary scores (see the module comment). */
export function placement(classes: readonly string[], decisions: readonly number[], label: string): Placement {
  const own = classes.indexOf(label);
  if (decisions.length === 1 && classes.length === 2) {
    const y = own === 1 ? 1 : -1;
    const other = classes[own === 1 ? 0 : 1];
    return { position: y * decisions[0], rival: other, placedIn: classes[decisions[0] > 0 ? 1 : 0] };
  }
  let best = 0;
  let rival = -1;
  for (let k = 0; k < decisions.length; k++) {
    if (decisions[k] > decisions[best]) best = k;
    if (k !== own && (rival < 0 || decisions[k] > decisions[rival])) rival = k;
  }
  const ownScore = own >= 0 ? decisions[own] : -Infinity;
  return { position: (ownScore - decisions[rival]) / 2, rival: classes[rival], placedIn: classes[best] };
}

export function headline(position: number, own: string, rival: string): string {
  const pair = `${own} | ${rival}`;
  const a = fmt(position);
  if (a === '0.00') return `on the boundary between ${pair}`;
  if (position <= -1) return `${a} from the boundary, past the margin, on the wrong side of ${pair}`;
  if (position < 0) return `${a} from the boundary, inside the margin, on the wrong side of ${pair}`;
  if (position < 1) return `${a} from the boundary, inside the margin, on its own side of ${pair}`;
  return `${a} from the boundary, clear of the margin on its own side of ${pair}`;
}

export function describeStanding(f: StandingFacts): StandingWords {
  const here = placement(f.classes, f.decisions, f.label);
  const details: string[] = [];
  if (here.placedIn !== f.label) details.push(`The fitted boundaries place it with ${here.placedIn}, not ${f.label}.`);
  let heldOutPosition: number | null = null;
  if (f.oofDecisions && f.oofDecisions.every((v): v is number => v !== null)) {
    const held = placement(f.classes, f.oofDecisions, f.label);
    heldOutPosition = held.position;
    if (held.placedIn !== f.label) {
      details.push(`Held out of the fit, it lands ${fmt(held.position)} on the wrong side and scores highest for ${held.placedIn}.`);
    } else if (held.position < 1) {
      details.push(`Held out of the fit, it stays on its own side but inside the margin (${fmt(held.position)}).`);
    } else {
      details.push(`Held out of the fit, it stays clear of the margin (${fmt(held.position)}).`);
    }
  }
  if (f.flags.includes('near-boundary')) details.push(`It lies within the near-boundary band (±${fmt(f.nearBand)} of a boundary).`);
  if (f.flags.includes('pivot')) details.push('A boundary leans on it: removing it moves the margin width by more than the pivot threshold.');
  details.push('Distances are in margin half-widths: the edges of the margin sit at 1 on either side of the boundary.');
  return { headline: headline(here.position, f.label, here.rival), details, position: here.position, rival: here.rival, placedIn: here.placedIn, heldOutPosition };
}

/**
 * Weight arithmetic for balancing: combining weights, moving a weight to another radius, splitting
 * a weight onto fixed positions (blades, bolt holes), the trial-weight rule of thumb, the force a
 * weight sees, and the ISO 21940-11 permissible residual unbalance. Pure functions.
 *
 * Angles here are plain geometric angles on the rotor, all in ONE convention (whichever the job
 * uses): combining and splitting do not depend on the direction angles are counted in, as long as
 * the inputs and the fixed positions share it.
 */
import { STANDARD_GRAVITY_M_S2 } from '../dsp/acceleration.js';
import { abs, add, argDeg, deltaDeg, fromPolar, wrapDeg, ZERO } from './complex.js';

/** Standard gravity, m/s^2 (the one definition lives with the acceleration stage). */
export const STANDARD_GRAVITY = STANDARD_GRAVITY_M_S2;

export interface PlacedWeight {
  readonly mass_g: number;
  readonly angle_deg: number;
  /** Radius the mass sits at, mm; omitted when all weights share one radius. */
  readonly radius_mm?: number;
}

export function rpmToRadPerS(speedRpm: number): number {
  return (speedRpm * 2 * Math.PI) / 60;
}

/**
 * Several weights in one plane as one equivalent weight at `toRadiusMm` (the vector sum of their
 * unbalances m*r). Without radii every weight is taken at the same radius and the result is too.
 */
export function combineWeights(
  weights: readonly PlacedWeight[],
  toRadiusMm?: number,
): { mass_g: number; angle_deg: number } {
  const withRadius = weights.filter((w) => w.radius_mm !== undefined).length;
  if (withRadius !== 0 && (withRadius !== weights.length || toRadiusMm === undefined)) {
    throw new Error(
      'combineWeights: give a radius for every weight and a target radius, or for none',
    );
  }
  let sum = ZERO;
  for (const w of weights) sum = add(sum, fromPolar(w.mass_g * (w.radius_mm ?? 1), w.angle_deg));
  const r = withRadius ? toRadiusMm! : 1;
  return { mass_g: abs(sum) / r, angle_deg: argDeg(sum) };
}

/** The same unbalance at another radius: mass scales by r_old / r_new, the angle stays. */
export function moveToRadius(massG: number, fromRadiusMm: number, toRadiusMm: number): number {
  return (massG * fromRadiusMm) / toRadiusMm;
}

export interface FixedPositions {
  /** Number of equally spaced positions (blades, holes), at least 3. */
  readonly count: number;
  /** Angle of position 0 from the reference mark, degrees, in the weight's convention. */
  readonly first_deg: number;
}

export interface SplitPart {
  /** Position number: 0 at first_deg, counting in the direction angles are measured. */
  readonly position: number;
  readonly angle_deg: number;
  readonly mass_g: number;
}

/**
 * Splits a weight onto the two neighbouring fixed positions by the law of sines: for a weight W at
 * angle t between positions a and b (spacing s = 360/count),
 *   W_a = W sin(b - t) / sin(s),   W_b = W sin(t - a) / sin(s),
 * so the two parts add up, as vectors, to W. A weight within 1e-9 degrees of a position goes there
 * whole. Parts are listed by position number.
 */
export function splitOntoPositions(
  massG: number,
  angleDeg: number,
  positions: FixedPositions,
): SplitPart[] {
  if (!Number.isInteger(positions.count) || positions.count < 3) {
    throw new Error('splitOntoPositions: need at least 3 equally spaced positions');
  }
  const step = 360 / positions.count;
  const rel = wrapDeg(angleDeg - positions.first_deg);
  let a = Math.floor(rel / step);
  let da = rel - a * step;
  if (step - da < 1e-9) {
    a = (a + 1) % positions.count;
    da = 0;
  }
  a %= positions.count;
  const at = (k: number) => wrapDeg(positions.first_deg + k * step);
  if (da < 1e-9) return [{ position: a, angle_deg: at(a), mass_g: massG }];
  const b = (a + 1) % positions.count;
  const rad = Math.PI / 180;
  const denom = Math.sin(step * rad);
  const parts: SplitPart[] = [
    { position: a, angle_deg: at(a), mass_g: (massG * Math.sin((step - da) * rad)) / denom },
    { position: b, angle_deg: at(b), mass_g: (massG * Math.sin(da * rad)) / denom },
  ];
  return parts.sort((x, y) => x.position - y.position);
}

export interface HoleSplit {
  /** Parts to fit: `position` is the index into the given list of holes. */
  readonly weights: readonly SplitPart[];
  /** Sum of the part masses, g (more than the weight unless it goes to one hole). */
  readonly total_mass_g: number;
  /** Angle between the two holes used, degrees (0 when the weight goes to one hole whole). */
  readonly gap_deg: number;
  readonly warnings: readonly {
    readonly code: string;
    readonly message: string;
    readonly hint: string;
  }[];
}

/** Why a split between holes cannot be given. */
export class SplitRefused extends Error {
  constructor(
    readonly code: string,
    message: string,
    readonly hint: string,
  ) {
    super(message);
    this.name = 'SplitRefused';
  }
}

/** Parts add up to more than this multiple of the weight: warn (this project's choice). */
const SPLIT_TOTAL_WARN = 1.5;

/**
 * Splits a weight between holes at any angles (not only equally spaced), by the law of sines: for a
 * weight W at angle t between holes a and b (going from a to b in the direction angles are counted,
 * gap g = b - a, 0 < g < 180),
 *   W_a = W sin(b - t) / sin(g),   W_b = W sin(t - a) / sin(g).
 * With exactly two holes those two are used; with more, the two nearest holes either side of t.
 * Refuses (SplitRefused) when no honest split exists: two holes 180 degrees apart (their parts can
 * only make a weight on the line through them), holes that do not lie either side of t within less
 * than 180 degrees (one part would be negative, i.e. mass to take off), or coincident holes. A
 * weight within 1e-9 degrees of a hole goes there whole.
 */
export function splitBetweenHoles(
  massG: number,
  angleDeg: number,
  holesDeg: readonly number[],
): HoleSplit {
  if (holesDeg.length < 2)
    throw new SplitRefused(
      'too_few_holes',
      `${holesDeg.length} hole(s) given; a split needs two`,
      'give the angles of at least two holes',
    );
  const t = wrapDeg(angleDeg);
  const holes = holesDeg.map((h, i) => ({ i, a: wrapDeg(h) }));
  const on = holes.find((h) => Math.abs(deltaDeg(h.a, t)) < 1e-9);
  if (on)
    return {
      weights: [{ position: on.i, angle_deg: on.a, mass_g: massG }],
      total_mass_g: massG,
      gap_deg: 0,
      warnings: [],
    };
  // Nearest hole before t (counting backwards) and after t (counting forwards).
  const before = holes.reduce((best, h) => (wrapDeg(t - h.a) < wrapDeg(t - best.a) ? h : best));
  const after = holes.reduce((best, h) => (wrapDeg(h.a - t) < wrapDeg(h.a - best.a) ? h : best));
  const gap = wrapDeg(after.a - before.a);
  const list = holesDeg.map((h) => `${wrapDeg(h).toFixed(1)}`).join(', ');
  if (before.i === after.i || gap < 1e-6) {
    throw new SplitRefused(
      'holes_coincide',
      `the holes (${list} deg) are all at one angle: no split can move the weight off it`,
      "give two holes either side of the weight's angle",
    );
  }
  if (Math.abs(gap - 180) < 1e-6) {
    throw new SplitRefused(
      'holes_opposite',
      `the holes either side of ${t.toFixed(1)} deg (${before.a.toFixed(1)} and ` +
        `${after.a.toFixed(1)} deg) are 180 deg apart: weights in them only act ` +
        `along the line through them, never at ${t.toFixed(1)} deg`,
      'use a hole between them, or two holes less than ' +
        "180 deg apart with the weight's angle between them",
    );
  }
  if (gap > 180) {
    throw new SplitRefused(
      'not_between',
      `${t.toFixed(1)} deg does not lie between two of the holes (${list} deg) ` +
        `less than 180 deg apart: the nearest either side are ${gap.toFixed(1)} deg ` +
        `apart, so one part would be negative (mass to take off)`,
      "give holes on both sides of the weight's angle, less " +
        'than 180 deg apart, or fit the weight at its own angle',
    );
  }
  const rad = Math.PI / 180;
  const den = Math.sin(gap * rad);
  const da = wrapDeg(t - before.a);
  const parts: SplitPart[] = [
    { position: before.i, angle_deg: before.a, mass_g: (massG * Math.sin((gap - da) * rad)) / den },
    { position: after.i, angle_deg: after.a, mass_g: (massG * Math.sin(da * rad)) / den },
  ];
  const total = parts[0]!.mass_g + parts[1]!.mass_g;
  const warnings =
    total > SPLIT_TOTAL_WARN * massG
      ? [
          {
            code: 'split_heavy',
            message:
              `the two parts add up to ${total.toFixed(1)} g, ` +
              `${(total / massG).toFixed(2)} times the ${massG.toFixed(1)} g ` +
              `weight, because the holes are ${gap.toFixed(0)} deg apart`,
            hint:
              "holes closer to the weight's angle need less " +
              'mass; check the plane takes the larger part',
          },
        ]
      : [];
  return {
    weights: parts.sort((x, y) => x.position - y.position),
    total_mass_g: total,
    gap_deg: gap,
    warnings,
  };
}

/** Centrifugal force a mass sees, N: F = m r omega^2. */
export function centrifugalForceN(massG: number, radiusMm: number, speedRpm: number): number {
  const w = rpmToRadPerS(speedRpm);
  return (massG / 1000) * (radiusMm / 1000) * w * w;
}

/**
 * Trial-weight rule of thumb (common practice): a trial weight whose centrifugal force is a
 * fraction (normally 10 %) of the rotor weight carried by the nearest bearing,
 *   m_t = fraction * M_b * g / (r * omega^2).
 * Returns grams.
 */
export function suggestTrialMassG(
  bearingLoadKg: number,
  radiusMm: number,
  speedRpm: number,
  fraction = 0.1,
): number {
  const w = rpmToRadPerS(speedRpm);
  return ((fraction * bearingLoadKg * STANDARD_GRAVITY) / ((radiusMm / 1000) * w * w)) * 1000;
}

/**
 * ISO 21940-11 (formerly ISO 1940-1) permissible residual unbalance for balance quality grade G:
 *   U_per [g mm] = 1000 * G [mm/s] * m [kg] / omega [rad/s] = 9549 * G * m / n [r/min]
 * (from memory; check against the current edition). For the whole rotor; how it is shared between
 * correction planes depends on the rotor (the standard allocates it by plane and bearing
 * distances).
 */
export function permissibleUnbalanceGmm(
  gradeMmS: number,
  rotorMassKg: number,
  speedRpm: number,
): number {
  return (1000 * gradeMmS * rotorMassKg) / rpmToRadPerS(speedRpm);
}

/**
 * Parses a balance quality grade written as 6.3, "6.3" or "G6.3" to mm/s; NaN when it is not one.
 */
export function parseGrade(text: string | number): number {
  if (typeof text === 'number') return text;
  const m = /^\s*G?\s*([0-9]+(?:\.[0-9]+)?)\s*$/i.exec(text);
  return m ? Number(m[1]) : NaN;
}

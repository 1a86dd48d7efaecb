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
import { abs, add, argDeg, fromPolar, wrapDeg, ZERO } from './complex.js';

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
export function combineWeights(weights: readonly PlacedWeight[], toRadiusMm?: number): { mass_g: number; angle_deg: number } {
  const withRadius = weights.filter((w) => w.radius_mm !== undefined).length;
  if (withRadius !== 0 && (withRadius !== weights.length || toRadiusMm === undefined)) {
    throw new Error('combineWeights: give a radius for every weight and a target radius, or for none');
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
export function splitOntoPositions(massG: number, angleDeg: number, positions: FixedPositions): SplitPart[] {
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
export function suggestTrialMassG(bearingLoadKg: number, radiusMm: number, speedRpm: number, fraction = 0.1): number {
  const w = rpmToRadPerS(speedRpm);
  return ((fraction * bearingLoadKg * STANDARD_GRAVITY) / ((radiusMm / 1000) * w * w)) * 1000;
}

/**
 * ISO 21940-11 (formerly ISO 1940-1) permissible residual unbalance for balance quality grade G:
 *   U_per [g mm] = 1000 * G [mm/s] * m [kg] / omega [rad/s] = 9549 * G * m / n [r/min]
 * (from memory; check against the current edition). For the whole rotor; how it is shared between
 * correction planes depends on the rotor (the standard allocates it by plane and bearing distances).
 */
export function permissibleUnbalanceGmm(gradeMmS: number, rotorMassKg: number, speedRpm: number): number {
  return (1000 * gradeMmS * rotorMassKg) / rpmToRadPerS(speedRpm);
}

/** Parses a balance quality grade written as 6.3, "6.3" or "G6.3" to mm/s; NaN when it is not one. */
export function parseGrade(text: string | number): number {
  if (typeof text === 'number') return text;
  const m = /^\s*G?\s*([0-9]+(?:\.[0-9]+)?)\s*$/i.exec(text);
  return m ? Number(m[1]) : NaN;
}

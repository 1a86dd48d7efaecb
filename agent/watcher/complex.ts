/**
 * Angle helpers for 1x vectors, over the project's one complex-number module
 * (agent/balance/complex.ts). A vector is written as amplitude at an angle; the angle is the phase
 * lag in degrees exactly as the DSP reports it (no sign flip), so every difference and ratio stays
 * in that same convention.
 */
import { argDeg, deltaDeg, wrapDeg } from '../balance/complex.js';

export {
  abs,
  add,
  conj,
  div,
  fromPolar,
  mul,
  scale,
  sub,
  ZERO,
  type Complex,
} from '../balance/complex.js';

const RAD = Math.PI / 180;

/** Angle in degrees, 0-360. */
export const angleDeg = argDeg;

/** Any angle in degrees to 0-360. */
export const normDeg = wrapDeg;

/** Signed difference a - b in degrees, folded to (-180, 180]. */
export const diffDeg = deltaDeg;

/** Unsigned angular separation of a and b, 0-180 degrees. */
export function sepDeg(a: number, b: number): number {
  return Math.abs(diffDeg(a, b));
}

/**
 * Circular mean of angles (degrees) and the largest separation of any angle from it.
 * Returns null for an empty list.
 */
export function circularSpread(
  anglesDeg: readonly number[],
): { meanDeg: number; maxDevDeg: number } | null {
  if (anglesDeg.length === 0) return null;
  let re = 0;
  let im = 0;
  for (const a of anglesDeg) {
    re += Math.cos(a * RAD);
    im += Math.sin(a * RAD);
  }
  const meanDeg = normDeg(Math.atan2(im, re) / RAD);
  let maxDevDeg = 0;
  for (const a of anglesDeg) maxDevDeg = Math.max(maxDevDeg, sepDeg(a, meanDeg));
  return { meanDeg, maxDevDeg };
}

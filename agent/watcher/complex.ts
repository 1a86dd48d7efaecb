/**
 * Small complex-number and angle helpers for 1x vectors. A vector is written as amplitude at an angle;
 * the angle is the phase lag in degrees exactly as the DSP reports it (no sign flip), so every
 * difference and ratio below stays in that same convention.
 */

export interface Complex {
  readonly re: number;
  readonly im: number;
}

const RAD = Math.PI / 180;

export function fromPolar(amp: number, angleDeg: number): Complex {
  return { re: amp * Math.cos(angleDeg * RAD), im: amp * Math.sin(angleDeg * RAD) };
}

export function abs(a: Complex): number {
  return Math.hypot(a.re, a.im);
}

/** Angle in degrees, 0-360. */
export function angleDeg(a: Complex): number {
  return normDeg(Math.atan2(a.im, a.re) / RAD);
}

export function add(a: Complex, b: Complex): Complex {
  return { re: a.re + b.re, im: a.im + b.im };
}

export function sub(a: Complex, b: Complex): Complex {
  return { re: a.re - b.re, im: a.im - b.im };
}

export function mul(a: Complex, b: Complex): Complex {
  return { re: a.re * b.re - a.im * b.im, im: a.re * b.im + a.im * b.re };
}

export function div(a: Complex, b: Complex): Complex {
  const d = b.re * b.re + b.im * b.im;
  return { re: (a.re * b.re + a.im * b.im) / d, im: (a.im * b.re - a.re * b.im) / d };
}

export function conj(a: Complex): Complex {
  return { re: a.re, im: -a.im };
}

export function scale(a: Complex, k: number): Complex {
  return { re: a.re * k, im: a.im * k };
}

export const ZERO: Complex = { re: 0, im: 0 };

/** Any angle in degrees to 0-360. */
export function normDeg(deg: number): number {
  const r = deg % 360;
  return r < 0 ? r + 360 : r === 0 ? 0 : r;
}

/** Signed difference a - b in degrees, folded to (-180, 180]. */
export function diffDeg(a: number, b: number): number {
  const d = normDeg(a - b);
  return d > 180 ? d - 360 : d;
}

/** Unsigned angular separation of a and b, 0-180 degrees. */
export function sepDeg(a: number, b: number): number {
  return Math.abs(diffDeg(a, b));
}

/**
 * Circular mean of angles (degrees) and the largest separation of any angle from it.
 * Returns null for an empty list.
 */
export function circularSpread(anglesDeg: readonly number[]): { meanDeg: number; maxDevDeg: number } | null {
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

/**
 * A tiny complex-number module for the balancing maths: plain immutable `{re, im}` values and pure
 * functions. Angles are in degrees at this boundary because every balancing figure people read is
 * in degrees.
 */
export interface Complex {
  readonly re: number;
  readonly im: number;
}

const RAD = Math.PI / 180;

export const ZERO: Complex = { re: 0, im: 0 };

export function complex(re: number, im: number): Complex {
  return { re, im };
}

/** amp at angle `deg` (counter-clockwise on the complex plane). */
export function fromPolar(amp: number, deg: number): Complex {
  return { re: amp * Math.cos(deg * RAD), im: amp * Math.sin(deg * RAD) };
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

/** a / b; b must not be zero (callers check magnitudes first). */
export function div(a: Complex, b: Complex): Complex {
  const d = b.re * b.re + b.im * b.im;
  return { re: (a.re * b.re + a.im * b.im) / d, im: (a.im * b.re - a.re * b.im) / d };
}

export function scale(a: Complex, k: number): Complex {
  return { re: a.re * k, im: a.im * k };
}

export function neg(a: Complex): Complex {
  return { re: -a.re, im: -a.im };
}

export function abs(a: Complex): number {
  return Math.hypot(a.re, a.im);
}

/** Argument in degrees, 0 <= angle < 360 (0 for the zero vector). */
export function argDeg(a: Complex): number {
  if (a.re === 0 && a.im === 0) return 0;
  return wrapDeg(Math.atan2(a.im, a.re) / RAD);
}

/** Any angle in degrees to 0 <= angle < 360. */
export function wrapDeg(deg: number): number {
  const w = deg % 360;
  const r = w < 0 ? w + 360 : w;
  // -1e-15 % 360 + 360 rounds to 360 in floating point; keep the range half-open.
  return r >= 360 ? 0 : r;
}

/** Signed difference a - b in degrees, in (-180, 180]. */
export function deltaDeg(a: number, b: number): number {
  const d = wrapDeg(a - b);
  return d > 180 ? d - 360 : d;
}

export function conj(a: Complex): Complex {
  return { re: a.re, im: -a.im };
}

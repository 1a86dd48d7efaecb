/**
 * Rigid-rotor physics of the simulated fan: pure functions, SI units inside, no state.
 *
 * ## Model
 * A rigid rotor turns in two bearings (A and B, e.g. DE and NDE) at axial positions z_A, z_B.
 * Unbalance sits in one or two correction planes at z_p. Each plane's unbalance is a mass m at
 * radius r, i.e. an unbalance U = m r (kg m), which at shaft speed omega pulls with the centrifugal
 * force F = m r omega^2 (N) towards the heavy spot, turning with the rotor.
 *
 * The rotating force of each plane is shared between the two bearings by statics (lever rule for a
 * beam on two supports): bearing A carries F (z_B - z_p) / (z_B - z_A), bearing B carries
 * F (z_p - z_A) / (z_B - z_A). For a plane outside the span (overhung impeller) the near bearing
 * carries more than F and the far bearing a negative share (pushed the other way).
 *
 * Each bearing housing moves in each direction (vertical, horizontal, axial) through its own
 * single-degree-of-freedom receptance G(omega) = (1/k) / (1 - (omega/omega_n)^2 + i 2 zeta
 * omega/omega_n): stiffness k, natural frequency omega_n and damping ratio zeta of that support
 * direction. Well below omega_n this is nearly 1/k (gentle rise with speed, small lag); near
 * omega_n it resonates (lag 90 deg). A softer horizontal support gives a larger horizontal reading;
 * the sensors' 90 deg spacing around the shaft gives the H/V phase difference of about 90 deg of a
 * circular-to-elliptical orbit.
 *
 * Axial motion: an unbalance force sets up a small rocking moment on the housings that shows as
 * axial 1x at both bearings, in phase. It is modelled as an axial force equal to `axial_coupling`
 * times each plane's force (projected on the axial sensor's angular position), the same at both
 * bearings. The coupling is small for planes between the bearings (default 0.05; centre-hung:
 * little axial) and large for planes outside them (default 1.5; overhung: high axial 1x, in phase
 * at both bearings). These two numbers are a signature model, not derived from the rotor's
 * dimensions.
 *
 * The model is linear in the unbalance: the 1x velocity at every sensor is a sum of influence
 * coefficients times the plane unbalances, and the coefficients stay constant at constant speed, so
 * an influence-coefficient balancing job on the simulated fan converges as it does on a real one.
 * Simplifications (stated so nobody mistakes them for more): the rotor's inertia does not couple
 * the two bearings (each bearing is its own oscillator), and the supports have no cross-coupling
 * between directions.
 *
 * ## Angles and phase (the conventions everything else must share)
 * - Shaft angle phi: 0 when the reference mark passes the tach pickup, growing in the direction of
 *   rotation. The tach pulse's rising edge (its 50 % point) is at phi = 0 (mod 2 pi).
 * - Stator angles (sensor positions) psi are measured from the tach pickup in the direction of
 *   rotation. A sensor's angle is the stator angle of its direction (vertical, horizontal, axial)
 *   plus its `mounting_angle_deg` from the config.
 * - Weight angle beta is measured on the rotor from the reference mark, against rotation by default
 *   (`against_rotation`), or with rotation. A weight at beta against rotation passes a fixed point
 *   beta degrees of rotation after the mark does.
 * - A phasor p describes x(t) = Re{ p e^{i k phi(t)} } = |p| cos(k phi - lag), lag = -arg p
 *   (degrees, 0-360): the lag from the tach edge to the positive peak, in degrees of that order's
 *   own cycle. This is the product's phase convention.
 * - Unbalance phasor u = m r e^{-i beta} (against rotation) or m r e^{+i beta} (with rotation).
 *   The force along a sensor direction psi is omega^2 u e^{-i psi}: lag = psi + beta. Displacement
 *   lags the force by the receptance lag; velocity leads displacement by 90 deg; acceleration leads
 *   it by 180. So for one weight: velocity lag = psi + beta + lag(G) - 90 (+ 180 where the lever
 *   share is negative). Adding a weight beta degrees further against rotation adds beta to every
 *   sensor's phase lag.
 */

import {
  abs,
  add,
  div,
  mul,
  scale,
  sub,
  wrapDeg,
  ZERO,
  type Complex,
} from '../../agent/balance/complex.js';
import type { AngleConvention } from '../../agent/balance/conventions.js';

/** Standard acceleration of gravity, m/s^2 (3rd CGPM, 1901): one constant for the whole project. */
export { STANDARD_GRAVITY_M_S2 } from '../../agent/dsp/acceleration.js';

export type Direction = 'vertical' | 'horizontal' | 'axial';
export type { AngleConvention };

/**
 * A complex amplitude; see the module comment for the convention (lag = -arg). The arithmetic is
 * the project's one complex module; only the phase reading below is the simulator's own.
 */
export type Phasor = Complex;
export { add, div, mul, scale, sub, ZERO };
export { abs as magnitude };

const DEG = Math.PI / 180;

/** A phasor of amplitude `amp` lagging by `lagDeg` degrees. */
export function phasor(amp: number, lagDeg: number): Phasor {
  return { re: amp * Math.cos(lagDeg * DEG), im: -amp * Math.sin(lagDeg * DEG) };
}

/** Phase lag in degrees, 0 <= lag < 360. */
export function lagDeg(p: Phasor): number {
  return wrapDeg(-Math.atan2(p.im, p.re) / DEG);
}

/** e^{-i angle}: a delay of `deg` degrees of the cycle. */
export function delay(deg: number): Phasor {
  return { re: Math.cos(deg * DEG), im: -Math.sin(deg * DEG) };
}

/** Multiplication by i (a lead of 90 degrees), times s. */
export function leadQuarter(a: Phasor, s: number): Phasor {
  return { re: -a.im * s, im: a.re * s };
}

export function rpmToRadS(rpm: number): number {
  return (rpm * 2 * Math.PI) / 60;
}

export function radSToRpm(omega: number): number {
  return (omega * 60) / (2 * Math.PI);
}

/** Centrifugal force of a mass on a rotor, newtons: F = m r omega^2. */
export function centrifugalForceN(massKg: number, radiusM: number, omegaRadS: number): number {
  return massKg * radiusM * omegaRadS * omegaRadS;
}

/**
 * Unbalance of a mass at a radius and angle, as a phasor in kg m (see the angle convention above).
 */
export function unbalancePhasor(
  massG: number,
  radiusMm: number,
  angleDeg: number,
  convention: AngleConvention,
): Phasor {
  const u = massG * 1e-3 * radiusMm * 1e-3;
  return convention === 'against_rotation' ? phasor(u, angleDeg) : phasor(u, -angleDeg);
}

/**
 * Shares of a plane's force carried by bearings A and B (lever rule, statics of a beam on two
 * supports).
 */
export function leverShares(
  bearingAMm: number,
  bearingBMm: number,
  planeMm: number,
): [number, number] {
  const span = bearingBMm - bearingAMm;
  return [(bearingBMm - planeMm) / span, (planeMm - bearingAMm) / span];
}

/** One support direction of one bearing housing, SI units. */
export interface SupportDynamics {
  readonly stiffness_n_per_m: number;
  readonly natural_hz: number;
  readonly damping_ratio: number;
}

/** Single-degree-of-freedom receptance (displacement per force, m/N) at angular frequency omega. */
export function receptance(s: SupportDynamics, omegaRadS: number): Phasor {
  const r = omegaRadS / (2 * Math.PI * s.natural_hz);
  return div(
    { re: 1 / s.stiffness_n_per_m, im: 0 },
    { re: 1 - r * r, im: 2 * s.damping_ratio * r },
  );
}

/** Natural frequency of a support carrying `massKg`, Hz: f_n = sqrt(k/m) / 2 pi. */
export function naturalHz(stiffnessNPerM: number, massKg: number): number {
  return Math.sqrt(stiffnessNPerM / massKg) / (2 * Math.PI);
}

export interface BearingGeometry {
  readonly name: string;
  readonly position_mm: number;
  readonly support: Readonly<Record<Direction, SupportDynamics>>;
}

export interface PlaneGeometry {
  readonly name: string;
  readonly position_mm: number;
}

export interface RotorGeometry {
  readonly bearings: readonly [BearingGeometry, BearingGeometry];
  readonly planes: readonly PlaneGeometry[];
  /**
   * Stator angle of each direction's reference sensor position, degrees from the tach pickup in the
   * direction of rotation.
   */
  readonly directions_deg: Readonly<Record<Direction, number>>;
  /** Axial force per radial plane force, for planes between the bearings and outside them. */
  readonly axial_coupling: { readonly between_bearings: number; readonly outboard: number };
}

export function isOutboard(g: RotorGeometry, planeMm: number): boolean {
  const lo = Math.min(g.bearings[0].position_mm, g.bearings[1].position_mm);
  const hi = Math.max(g.bearings[0].position_mm, g.bearings[1].position_mm);
  return planeMm < lo || planeMm > hi;
}

/** Where a sensor sits: which bearing, which direction, and its extra mounting angle. */
export interface SensorPlace {
  readonly bearing: number;
  readonly direction: Direction;
  readonly mounting_angle_deg: number;
}

/**
 * Influence coefficient: 1x velocity phasor (m/s) at a sensor per unit unbalance phasor (1 kg m at
 * angle 0) in plane `plane`, at shaft speed omega.
 */
export function influenceCoefficient(
  g: RotorGeometry,
  at: SensorPlace,
  plane: number,
  omegaRadS: number,
): Phasor {
  const zp = g.planes[plane]!.position_mm;
  const b = g.bearings[at.bearing]!;
  let share: number;
  if (at.direction === 'axial') {
    share = isOutboard(g, zp) ? g.axial_coupling.outboard : g.axial_coupling.between_bearings;
  } else {
    share = leverShares(g.bearings[0].position_mm, g.bearings[1].position_mm, zp)[at.bearing]!;
  }
  const psi = g.directions_deg[at.direction] + at.mounting_angle_deg;
  // force along the sensor per kg m: omega^2 * share * e^{-i psi}
  const force = scale(delay(psi), omegaRadS * omegaRadS * share);
  const x = mul(receptance(b.support[at.direction], omegaRadS), force);
  return leadQuarter(x, omegaRadS);
}

/**
 * 1x velocity phasor (m/s) at a sensor from the unbalance phasors (kg m) of every plane, in plane
 * order.
 */
export function unbalanceVelocity(
  g: RotorGeometry,
  at: SensorPlace,
  unbalance: readonly Phasor[],
  omegaRadS: number,
): Phasor {
  let re = 0;
  let im = 0;
  for (let p = 0; p < g.planes.length; p++) {
    const u = unbalance[p];
    if (!u || (u.re === 0 && u.im === 0)) continue;
    const v = mul(influenceCoefficient(g, at, p, omegaRadS), u);
    re += v.re;
    im += v.im;
  }
  return { re, im };
}

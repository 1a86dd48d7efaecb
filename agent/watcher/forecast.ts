import type { StoredCoefficients } from '../balance/coefficients.js';
import type { WindowResult } from '../dsp/types.js';
import type { Baseline } from './baseline.js';
import { abs, add, angleDeg, conj, div, fromPolar, mul, sub, ZERO, type Complex } from './complex.js';
import type { HealthReport } from './health.js';

/**
 * Balance forecast: with influence coefficients kept from an earlier balancing job, the correction
 * weight per plane that would bring today's 1x vectors back to baseline (or to zero without one).
 * Influence-coefficient method (common practice): V = V0 + H W, so W = least-squares solution of
 * H W = V_target - V_now. Vectors use the phase lag as their angle and weights the angle convention of
 * the stored job, the same representation the coefficients were computed in.
 *
 * This is a small solver of its own; agent/balance/ may bring the balancing workbench's solver, and the
 * two should be unified then.
 */

export interface LeastSquares {
  readonly x: Complex[];
  /** Condition number of H (ratio of its largest to smallest singular value); null for more than 2 unknowns. */
  readonly condition: number | null;
}

/**
 * Complex least squares min |H x - b| through the normal equations (H^H H) x = H^H b, solved by Gaussian
 * elimination with partial pivoting. H is m x p with m >= p. Null when H^H H is singular.
 */
export function complexLeastSquares(h: readonly (readonly Complex[])[], b: readonly Complex[]): LeastSquares | null {
  const m = h.length;
  const p = h[0]?.length ?? 0;
  if (m < p || p === 0) return null;
  const a: Complex[][] = [];
  const r: Complex[] = [];
  for (let i = 0; i < p; i++) {
    a.push([]);
    let ri = ZERO;
    for (let k = 0; k < m; k++) ri = add(ri, mul(conj(h[k]![i]!), b[k]!));
    r.push(ri);
    for (let j = 0; j < p; j++) {
      let s = ZERO;
      for (let k = 0; k < m; k++) s = add(s, mul(conj(h[k]![i]!), h[k]![j]!));
      a[i]!.push(s);
    }
  }
  let condition: number | null = null;
  if (p === 1) condition = 1;
  else if (p === 2) {
    // Eigenvalues of the 2x2 Hermitian H^H H are the squared singular values of H.
    const t = (a[0]![0]!.re + a[1]![1]!.re) / 2;
    const d = Math.sqrt(((a[0]![0]!.re - a[1]![1]!.re) / 2) ** 2 + abs(a[0]![1]!) ** 2);
    condition = t - d > 0 ? Math.sqrt((t + d) / (t - d)) : Infinity;
  }
  const scaleRef = Math.max(...a.map((row, i) => abs(row[i]!)));
  for (let col = 0; col < p; col++) {
    let piv = col;
    for (let i = col + 1; i < p; i++) if (abs(a[i]![col]!) > abs(a[piv]![col]!)) piv = i;
    if (abs(a[piv]![col]!) <= 1e-12 * scaleRef) return null;
    [a[col], a[piv]] = [a[piv]!, a[col]!];
    [r[col], r[piv]] = [r[piv]!, r[col]!];
    for (let i = col + 1; i < p; i++) {
      const f = div(a[i]![col]!, a[col]![col]!);
      for (let j = col; j < p; j++) a[i]![j] = sub(a[i]![j]!, mul(f, a[col]![j]!));
      r[i] = sub(r[i]!, mul(f, r[col]!));
    }
  }
  const x: Complex[] = new Array(p).fill(ZERO);
  for (let i = p - 1; i >= 0; i--) {
    let s = r[i]!;
    for (let j = i + 1; j < p; j++) s = sub(s, mul(a[i]![j]!, x[j]!));
    x[i] = div(s, a[i]![i]!);
  }
  return { x, condition };
}

export const BALANCE_CAUTIONS: readonly string[] = [
  'A forecast to prepare a weight before a planned stop, not an instruction: confirm with a check run after fitting it.',
  'Lock out and tag out before anyone touches the rotor.',
  'Weld or bolt weights as the fan maker allows; a weight sees F = m r omega^2.',
  'Nobody stands in line with the impeller at start-up.',
];

export interface BalanceForecast {
  readonly available: boolean;
  /** Why there is no forecast, or what it is based on, in words. */
  readonly why: string;
  readonly job_id: string | null;
  readonly angle_convention: StoredCoefficients['angle_convention'] | null;
  /** Target of the correction: the baseline 1x vectors, or zero when no baseline exists. */
  readonly target: 'baseline' | 'zero' | null;
  readonly weights: readonly { readonly plane: string; readonly mass_g: number; readonly angle_deg: number }[];
  readonly sensors_used: readonly string[];
  /** Predicted remaining 1x difference from the target after the correction, r.m.s. over the sensors used, mm/s peak. */
  readonly residual_pk_mm_s: number | null;
  readonly condition: number | null;
  readonly notes: readonly string[];
  readonly cautions: readonly string[];
}

/** A forecast that cannot be given, and why. */
export const unavailable = (why: string, coeffs: StoredCoefficients | null = null): BalanceForecast => ({
  available: false,
  why,
  job_id: coeffs?.job_id ?? null,
  angle_convention: coeffs?.angle_convention ?? null,
  target: null,
  weights: [],
  sensors_used: [],
  residual_pk_mm_s: null,
  condition: null,
  notes: [],
  cautions: BALANCE_CAUTIONS,
});

export function forecastBalance(
  asset: string,
  coeffs: StoredCoefficients | null,
  baseline: Baseline | null,
  window: WindowResult,
  health: HealthReport,
): BalanceForecast {
  if (!coeffs) return unavailable('no influence coefficients stored for this fan (a balancing job saves them)');
  if (coeffs.asset !== asset) return unavailable(`the stored coefficients belong to asset "${coeffs.asset}", not "${asset}"`, coeffs);
  const ok = new Set(health.channels.filter((c) => c.phase_ok).map((c) => c.id));
  const rows: Complex[][] = [];
  const rhs: Complex[] = [];
  const used: string[] = [];
  const notes: string[] = [];
  for (const c of window.channels) {
    const hc = coeffs.coefficients[c.id];
    const v = c.orders['1'];
    if (!hc) continue;
    if (!ok.has(c.id) || !v) {
      notes.push(`${c.id} not used: no healthy 1x vector in this window`);
      continue;
    }
    if (!coeffs.planes.every((p) => hc[p])) {
      notes.push(`${c.id} not used: it lacks a coefficient for a plane`);
      continue;
    }
    const b = baseline?.channels[c.id];
    if (baseline && !b) {
      notes.push(`${c.id} not used: not in the baseline`);
      continue;
    }
    const target = b ? fromPolar(b.one_x_rms_mm_s * Math.SQRT2, b.one_x_phase_deg) : ZERO;
    rows.push(coeffs.planes.map((p) => fromPolar(hc[p]!.amp_mm_s_pk_per_g, hc[p]!.phase_deg)));
    rhs.push(sub(target, fromPolar(v.amp_pk_mm_s, v.phase_deg)));
    used.push(c.id);
  }
  if (used.length < coeffs.planes.length) {
    return { ...unavailable(`${used.length} healthy sensor(s) with coefficients for ${coeffs.planes.length} plane(s): at least as many sensors as planes are needed`, coeffs), notes };
  }
  const sol = complexLeastSquares(rows, rhs);
  if (!sol) return { ...unavailable('the stored coefficients cannot separate the planes with the sensors available (singular system)', coeffs), notes };
  if (sol.condition !== null && sol.condition > 20) {
    notes.push(`the planes are hard to separate with these sensors (condition number ${sol.condition.toFixed(0)}): treat the split between planes with care`);
  }
  if (window.speed_rpm !== null && Math.abs(window.speed_rpm - coeffs.speed_rpm) / coeffs.speed_rpm > 0.05) {
    notes.push(`coefficients were measured at ${coeffs.speed_rpm.toFixed(0)} r/min, the fan runs at ${window.speed_rpm.toFixed(0)} r/min: the forecast is less reliable`);
  }
  let ss = 0;
  rows.forEach((row, i) => {
    let pred = ZERO;
    row.forEach((hij, j) => (pred = add(pred, mul(hij, sol.x[j]!))));
    ss += abs(sub(pred, rhs[i]!)) ** 2;
  });
  return {
    available: true,
    why: `from balancing job ${coeffs.job_id} (saved ${coeffs.saved_at}), ${used.length} sensor(s), target ${baseline ? 'the baseline 1x vectors' : 'zero 1x (no baseline)'}; weight angles from the reference mark, ${coeffs.angle_convention.replace('_', ' ')}`,
    job_id: coeffs.job_id,
    angle_convention: coeffs.angle_convention,
    target: baseline ? 'baseline' : 'zero',
    weights: coeffs.planes.map((plane, j) => ({ plane, mass_g: abs(sol.x[j]!), angle_deg: angleDeg(sol.x[j]!) })),
    sensors_used: used,
    residual_pk_mm_s: Math.sqrt(ss / used.length),
    condition: sol.condition,
    notes,
    cautions: BALANCE_CAUTIONS,
  };
}

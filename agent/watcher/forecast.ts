import type { StoredCoefficients } from '../balance/coefficients.js';
import type { WindowResult } from '../dsp/types.js';
import type { Baseline } from './baseline.js';
import { fromInternalDeg } from '../balance/conventions.js';
import { DEFAULT_SOLVE_OPTIONS } from '../balance/solve.js';
import {
  cmatrixFrom,
  columnScaledConditionNumber,
  getEl,
  leastSquares,
} from '../balance/linalg.js';
import { abs, add, angleDeg, fromPolar, mul, sub, ZERO, type Complex } from './complex.js';
import type { HealthReport } from './health.js';

/**
 * Balance forecast: with influence coefficients kept from an earlier balancing job, the correction
 * weight per plane that would bring today's 1x vectors back to baseline (or to zero without one).
 * Influence-coefficient method (common practice): V = V0 + H W, so W = least-squares solution of
 * H W = V_target - V_now. Vectors use the phase lag as their angle. H is the response to 1 g ON the
 * reference mark, the same in both angle conventions, so W comes out in the balancing workbench's
 * internal (against-rotation) frame and is given to people in the stored job's convention
 * (agent/balance/conventions.ts: with rotation, every angle changes sign).
 *
 * The solve, the condition number and its limits are the balancing workbench's own
 * (agent/balance/), so a forecast and a trim run from the same coefficients agree.
 */

export const BALANCE_CAUTIONS: readonly string[] = [
  'A forecast to prepare a weight before a planned stop, not ' +
    'an instruction: confirm with a check run after fitting it.',
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
  /**
   * Per plane: mass and angle, at the radius the job's weights sat at (null when the job did not
   * say).
   */
  readonly weights: readonly {
    readonly plane: string;
    readonly mass_g: number;
    readonly angle_deg: number;
    readonly radius_mm: number | null;
  }[];
  readonly sensors_used: readonly string[];
  /**
   * Predicted remaining 1x difference from the target after the correction, r.m.s. over the sensors
   * used, mm/s peak.
   */
  readonly residual_pk_mm_s: number | null;
  readonly condition: number | null;
  readonly notes: readonly string[];
  readonly cautions: readonly string[];
}

/** A forecast that cannot be given, and why. */
export const unavailable = (
  why: string,
  coeffs: StoredCoefficients | null = null,
): BalanceForecast => ({
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
  if (!coeffs)
    return unavailable(
      'no influence coefficients stored for this fan (a balancing job saves them)',
    );
  if (coeffs.asset !== asset)
    return unavailable(
      `the stored coefficients belong to asset "${coeffs.asset}", not "${asset}"`,
      coeffs,
    );
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
    return {
      ...unavailable(
        `${used.length} healthy sensor(s) with coefficients for ` +
          `${coeffs.planes.length} plane(s): at least as many sensors as planes are needed`,
        coeffs,
      ),
      notes,
    };
  }
  const h = cmatrixFrom(rows);
  const condition = columnScaledConditionNumber(h);
  if (condition >= DEFAULT_SOLVE_OPTIONS.conditionLimit)
    return {
      ...unavailable(
        'the stored coefficients cannot separate the planes ' +
          'with the sensors available (singular system)',
        coeffs,
      ),
      notes,
    };
  if (condition > DEFAULT_SOLVE_OPTIONS.conditionWarn) {
    notes.push(
      `the planes are hard to separate with these sensors (condition number ` +
        `${condition.toFixed(0)}): treat the split between planes with care`,
    );
  }
  const solved = leastSquares(h, cmatrixFrom(rhs.map((r) => [r])));
  const x = coeffs.planes.map((_, j) => getEl(solved, j, 0));
  if (
    window.speed_rpm !== null &&
    Math.abs(window.speed_rpm - coeffs.speed_rpm) / coeffs.speed_rpm > 0.05
  ) {
    notes.push(
      `coefficients were measured at ${coeffs.speed_rpm.toFixed(0)} r/min, the fan ` +
        `runs at ${window.speed_rpm.toFixed(0)} r/min: the forecast is less reliable`,
    );
  }
  let ss = 0;
  rows.forEach((row, i) => {
    let pred = ZERO;
    row.forEach((hij, j) => (pred = add(pred, mul(hij, x[j]!))));
    ss += abs(sub(pred, rhs[i]!)) ** 2;
  });
  return {
    available: true,
    why:
      `from balancing job ${coeffs.job_id} (saved ${coeffs.saved_at}), ` +
      `${used.length} sensor(s), target ` +
      `${baseline ? 'the baseline 1x vectors' : 'zero 1x (no baseline)'}; weight ` +
      `angles from the reference mark, ${coeffs.angle_convention.replace('_', ' ')}`,
    job_id: coeffs.job_id,
    angle_convention: coeffs.angle_convention,
    target: baseline ? 'baseline' : 'zero',
    weights: coeffs.planes.map((plane, j) => ({
      plane,
      mass_g: abs(x[j]!),
      angle_deg: fromInternalDeg(angleDeg(x[j]!), coeffs.angle_convention),
      radius_mm: coeffs.radius_mm?.[plane] ?? null,
    })),
    sensors_used: used,
    residual_pk_mm_s: Math.sqrt(ss / used.length),
    condition,
    notes,
    cautions: BALANCE_CAUTIONS,
  };
}

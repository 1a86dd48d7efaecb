/**
 * One correction for a fan that must run well over a speed range (a variable-speed drive): runs
 * captured at several speeds, influence coefficients measured per speed, and the one set of plane
 * weights C that minimises the weighted sum over speeds i and sensors s of
 *     | w_i * (V0_i[s] + sum_p H_i[s][p] C[p]) |^2
 * (complex least squares on the stacked system; w_i the optional weight of speed i, default 1).
 * The predicted residual at every speed is shown. When the best compromise still leaves some speed
 * with more than `maxResidualShare` of its as-found vibration, the speeds share no common solution
 * worth using: no weights are given and the reason is said. Pure.
 *
 * Each speed group is solved on its own first (solve.ts) for its coefficients and, where it can be,
 * its own correction (shown for comparison). Groups whose coefficients cannot be measured stop the
 * job; a group with fewer sensors than planes is fine here, since the speeds together may fix the
 * planes (e.g. one sensor, two planes, two speeds).
 */
import { abs, add, argDeg, type Complex, fromPolar, neg } from './complex.js';
import { type AngleConvention, conventionText, fromInternalDeg } from './conventions.js';
import type { BalanceJob, BalanceResult, Issue, JobRun, PlaneWeight, SensorVector } from './job.js';
import { cmatrix, columnScaledConditionNumber, getEl, leastSquares, setEl } from './linalg.js';
import { solveBalanceJob } from './solve.js';
import { centrifugalForceN } from './weights.js';

export interface SpeedGroup {
  readonly speed_rpm: number;
  /**
   * Weight of this speed in the least squares (default 1): larger for the speeds the fan runs at
   * most.
   */
  readonly weight?: number;
  readonly label?: string;
  /** runs[0] as found at this speed, then runs with weights, as in a `balance solve` job. */
  readonly runs: readonly JobRun[];
}

export interface MultiSpeedJob {
  readonly angle_convention: AngleConvention;
  readonly planes: readonly string[];
  readonly amp_unit?: string;
  readonly radius_mm?: Readonly<Record<string, number>>;
  readonly max_mass_g?: Readonly<Record<string, number>>;
  readonly speeds: readonly SpeedGroup[];
  /**
   * A compromise leaving any speed above this share of its as-found vibration is refused (default
   * 0.5).
   */
  readonly max_residual_share?: number;
}

export interface MultiSpeedOptions {
  /**
   * Speeds closer than this, % of the lower one, are one speed measured twice (this project's
   * choice: 2, as solve.ts).
   */
  readonly speedDistinctPct: number;
  readonly maxResidualShare: number;
  readonly conditionLimit: number;
  readonly conditionWarn: number;
}

export const DEFAULT_MULTI_SPEED_OPTIONS: MultiSpeedOptions = {
  speedDistinctPct: 2,
  maxResidualShare: 0.5,
  conditionLimit: 1e6,
  conditionWarn: 10,
};

export interface SpeedOutcome {
  readonly speed_rpm: number;
  readonly weight: number;
  readonly label: string | null;
  readonly as_found: readonly SensorVector[];
  /** 1x vectors expected at this speed with the common correction (empty when none is given). */
  readonly predicted_residuals: readonly SensorVector[];
  /**
   * r.m.s. over the sensors of predicted / as found (null when no compromise could be computed).
   */
  readonly residual_share: number | null;
  /** This speed's own correction when it can be solved alone (for comparison), else empty. */
  readonly own_corrections: readonly PlaneWeight[];
  readonly warnings: readonly Issue[];
}

export interface MultiSpeedResult {
  readonly ok: boolean;
  readonly method: 'multi_speed_least_squares';
  readonly angle_convention: AngleConvention;
  readonly convention: string;
  readonly amp_unit: string | null;
  readonly planes: readonly string[];
  readonly sensors: readonly string[];
  /**
   * The one correction for all speeds (relative to as found, trial weights removed); force at the
   * highest speed.
   */
  readonly corrections: readonly PlaneWeight[];
  readonly speeds: readonly SpeedOutcome[];
  readonly condition_number: number | null;
  readonly max_residual_share: number;
  readonly warnings: readonly Issue[];
  readonly problems: readonly Issue[];
}

/** Problems of one speed's solve that leave its influence coefficients unknown. */
const COEFFICIENT_PROBLEMS = new Set([
  'plane_without_trial',
  'trial_runs_not_independent',
  'trial_no_effect',
  'no_trial_runs',
]);

function fmt(x: number, d = 0): string {
  return x.toFixed(d);
}

function vec(sensor: string, z: Complex): SensorVector {
  return { sensor, amp: abs(z), phase_deg: argDeg(z) };
}

export function solveMultiSpeed(
  job: MultiSpeedJob,
  options: Partial<MultiSpeedOptions> = {},
): MultiSpeedResult {
  const opt = { ...DEFAULT_MULTI_SPEED_OPTIONS, ...options };
  const maxShare = job.max_residual_share ?? opt.maxResidualShare;
  const conv = job.angle_convention;
  const planes = job.planes;
  const P = planes.length;
  const sensors = Object.keys(job.speeds[0]?.runs[0]?.readings ?? {});
  const warnings: Issue[] = [];
  const problems: Issue[] = [];
  const name = (i: number) =>
    `speeds[${i}] (${fmt(job.speeds[i]!.speed_rpm)} ` +
    `r/min${job.speeds[i]!.label ? `, "${job.speeds[i]!.label}"` : ''})`;

  // Distinct speeds.
  const order = job.speeds.map((g, i) => ({ i, v: g.speed_rpm })).sort((a, b) => a.v - b.v);
  for (let k = 1; k < order.length; k++) {
    const lo = order[k - 1]!;
    const hi = order[k]!;
    if (((hi.v - lo.v) / lo.v) * 100 < opt.speedDistinctPct) {
      problems.push({
        code: 'speeds_not_distinct',
        message:
          `${name(lo.i)} and ${name(hi.i)} are less than ${opt.speedDistinctPct} % ` +
          `apart: they are one speed measured twice, which adds nothing across the ` +
          `range and doubles its say in the least squares`,
        hint:
          'put their runs into one speed group (more runs at one speed ' +
          'are fine), or measure at a speed clearly apart from it',
      });
    }
  }

  // Per-speed solves.
  const solved: BalanceResult[] = job.speeds.map((g) => {
    const runs = g.runs.map((r) => ({ ...r, speed_rpm: r.speed_rpm ?? g.speed_rpm }));
    const one: BalanceJob = {
      angle_convention: conv,
      planes,
      runs,
      ...(job.amp_unit ? { amp_unit: job.amp_unit } : {}),
      ...(job.radius_mm ? { radius_mm: job.radius_mm } : {}),
    };
    return solveBalanceJob(one);
  });
  solved.forEach((r, i) => {
    for (const p of r.problems.filter((q) => COEFFICIENT_PROBLEMS.has(q.code)))
      problems.push({ code: p.code, message: `${name(i)}: ${p.message}`, hint: p.hint });
  });

  const outcomes = (residuals: (SensorVector[] | null)[]): SpeedOutcome[] =>
    job.speeds.map((g, i) => {
      const r = solved[i]!;
      const res = residuals[i] ?? null;
      const rms = (vs: readonly SensorVector[]) =>
        Math.sqrt(vs.reduce((s, v) => s + v.amp * v.amp, 0) / Math.max(vs.length, 1));
      return {
        speed_rpm: g.speed_rpm,
        weight: g.weight ?? 1,
        label: g.label ?? null,
        as_found: r.as_found,
        predicted_residuals: res ?? [],
        residual_share: res ? rms(res) / Math.max(rms(r.as_found), 1e-300) : null,
        own_corrections: r.ok ? r.corrections : [],
        warnings: r.warnings,
      };
    });
  const base = {
    method: 'multi_speed_least_squares' as const,
    angle_convention: conv,
    convention: conventionText(conv),
    amp_unit: job.amp_unit ?? null,
    planes,
    sensors,
    max_residual_share: maxShare,
  };
  if (problems.length)
    return {
      ...base,
      ok: false,
      corrections: [],
      speeds: outcomes(job.speeds.map(() => null)),
      condition_number: null,
      warnings,
      problems,
    };

  // Stacked system.
  const S = sensors.length;
  const N = job.speeds.length;
  const A = cmatrix(N * S, P);
  const b = cmatrix(N * S, 1);
  const H: Complex[][][] = solved.map((r) =>
    sensors.map((s) =>
      planes.map((p) => {
        const c = r.influence_coefficients.find((x) => x.sensor === s && x.plane === p)!;
        return fromPolar(c.amp_per_g, c.phase_deg);
      }),
    ),
  );
  const V0: Complex[][] = solved.map((r) =>
    sensors.map((s) => {
      const v = r.as_found.find((x) => x.sensor === s)!;
      return fromPolar(v.amp, v.phase_deg);
    }),
  );
  job.speeds.forEach((g, i) => {
    const w = g.weight ?? 1;
    sensors.forEach((_, k) => {
      planes.forEach((_p, p) => {
        const h = H[i]![k]![p]!;
        setEl(A, i * S + k, p, { re: w * h.re, im: w * h.im });
      });
      const v = neg(V0[i]![k]!);
      setEl(b, i * S + k, 0, { re: w * v.re, im: w * v.im });
    });
  });
  const cond = N * S < P ? Infinity : columnScaledConditionNumber(A);
  if (!(cond < opt.conditionLimit)) {
    problems.push({
      code: 'singular',
      message:
        `${N * S} readings over all speeds (${S} sensor(s) x ${N} speeds) ` +
        `do not tell the ${P} planes apart (condition number ` +
        `${Number.isFinite(cond) ? cond.toExponential(1) : 'infinite'})`,
      hint:
        'add sensors at the other bearing, or speeds where ' +
        'the response differs; or solve for fewer planes',
    });
    return {
      ...base,
      ok: false,
      corrections: [],
      speeds: outcomes(job.speeds.map(() => null)),
      condition_number: cond,
      warnings,
      problems,
    };
  }
  if (cond > opt.conditionWarn) {
    warnings.push({
      code: 'ill_conditioned',
      message:
        `the stacked influence matrix is badly conditioned (condition number ` +
        `${fmt(cond, 1)}): reading errors are amplified in the corrections`,
      hint: 'sensors at both bearings or more distinct speeds help',
    });
  }
  const Cm = leastSquares(A, b);
  const C = planes.map((_, p) => getEl(Cm, p, 0));
  const residuals = job.speeds.map((_, i) =>
    sensors.map((s, k) => {
      let v = V0[i]![k]!;
      for (let p = 0; p < P; p++) {
        const h = H[i]![k]![p]!;
        const c = C[p]!;
        v = add(v, { re: h.re * c.re - h.im * c.im, im: h.re * c.im + h.im * c.re });
      }
      return vec(s, v);
    }),
  );
  const speedsOut = outcomes(residuals);
  const bad = speedsOut
    .map((o, i) => ({ o, i }))
    .filter((x) => (x.o.residual_share ?? 0) > maxShare);
  if (bad.length) {
    problems.push({
      code: 'no_common_solution',
      message:
        `no one correction suits all the speeds: the best compromise leaves ` +
        bad.map((x) => `${name(x.i)} at ${fmt((x.o.residual_share ?? 0) * 100)} %`).join(', ') +
        ` of its as-found vibration (limit ${fmt(maxShare * 100)} %); ` +
        speedsOut
          .map((o, i) => `${fmt(o.speed_rpm)} r/min: ${fmt((o.residual_share ?? 0) * 100)} %`)
          .join(', '),
      hint:
        'the response changes shape across the range (a resonance between ' +
        'the speeds, or a rotor that bends): balance for the speed the fan ' +
        'runs at most (give it a larger "weight"), add a correction plane, ' +
        "or look at the speeds' own corrections below; raise " +
        'max_residual_share only if that compromise is acceptable to the plant',
    });
    return {
      ...base,
      ok: false,
      corrections: [],
      speeds: speedsOut,
      condition_number: cond,
      warnings,
      problems,
    };
  }
  const top = Math.max(...job.speeds.map((g) => g.speed_rpm));
  const corrections: PlaneWeight[] = planes.map((plane, p) => {
    const mass = abs(C[p]!);
    const r = job.radius_mm?.[plane];
    const max = job.max_mass_g?.[plane];
    return {
      plane,
      mass_g: mass,
      angle_deg: fromInternalDeg(argDeg(C[p]!), conv),
      ...(r !== undefined
        ? { unbalance_g_mm: mass * r, force_n: centrifugalForceN(mass, r, top) }
        : {}),
      ...(max !== undefined ? { over_max: mass > max } : {}),
    };
  });
  for (const w of corrections.filter((c) => c.over_max)) {
    warnings.push({
      code: 'over_max_mass',
      message:
        `the correction for ${w.plane} is ${fmt(w.mass_g, 1)} g, more ` +
        `than the ${fmt(job.max_mass_g![w.plane]!, 1)} g this plane takes`,
      hint:
        'spread it over several positions or fit it ' +
        'at a larger radius (`turnwise balance split`)',
    });
  }
  return {
    ...base,
    ok: true,
    corrections,
    speeds: speedsOut,
    condition_number: cond,
    warnings,
    problems,
  };
}

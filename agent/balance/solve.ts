/**
 * The influence-coefficient solver. Pure: a job in, a result out, no I/O.
 *
 * Model (linear, one speed): the 1x vector at sensor s in run j is
 *   V[j][s] = V[0][s] + sum_p H[s][p] * T[j][p]
 * where T[j][p] is the vector sum of the weights in plane p at run j (relative to as found, in the
 * internal against-rotation frame, see conventions.ts) and H[s][p] the influence coefficient.
 *
 * 1. Influence coefficients from the runs with weights: T (runs x planes) * H^T = dV (runs x
 *    sensors), solved exactly for as many independent runs as planes, by least squares for more
 *    (redundant runs, trial weights left in, static/couple pairs, a check run all fit this form).
 *    A job with only the as-found run uses given coefficients instead (trim run).
 * 2. Corrections: H * C = -V0, exact for as many independent sensors as planes (one plane:
 *    C = -V0 / H; two planes: C = -H^-1 V0), complex least squares for more sensors.
 *    Fewer sensors than planes, or a singular matrix, gives problems and no numbers.
 */
import { allocatePermissible } from './allocation.js';
import {
  abs,
  add,
  argDeg,
  type Complex,
  deltaDeg,
  fromPolar,
  neg,
  scale,
  sub,
  ZERO,
} from './complex.js';
import {
  type AngleConvention,
  conventionText,
  fromInternalDeg,
  toInternalDeg,
} from './conventions.js';
import type {
  BalanceJob,
  Reading,
  BalanceResult,
  CoefficientOut,
  Issue,
  PlaneWeight,
  SensorVector,
  StaticCouple,
  TrialCheck,
  UnbalanceReport,
} from './job.js';
import {
  cmatrix,
  type CMatrix,
  cmul,
  columnScaledConditionNumber,
  getEl,
  leastSquares,
  setEl,
} from './linalg.js';
import { centrifugalForceN, permissibleUnbalanceGmm } from './weights.js';

export interface SolveOptions {
  /** Trial run moved a sensor's vector enough at this amplitude change, % (common practice: 30). */
  readonly trialMinAmpPct: number;
  /** ... or at this phase change, degrees (common practice: 30). */
  readonly trialMinPhaseDeg: number;
  /**
   * Below this vector change at every sensor, % of the as-found amplitude, a run changed nothing.
   */
  readonly trialNothingPct: number;
  /** Runs whose speeds differ by more than this, % of the as-found speed, get a warning. */
  readonly speedTolerancePct: number;
  /** Condition numbers above this get a warning. */
  readonly conditionWarn: number;
  /** Condition numbers above this are treated as singular: no corrections. */
  readonly conditionLimit: number;
  /** Redundant runs that miss the linear fit by more than this, %, get a warning. */
  readonly misfitWarnPct: number;
}

/**
 * Defaults. The 30 % / 30 degree trial rule is common practice; the other thresholds are this
 * project's choices, stated so they can be judged: 5 % is about the scatter of repeated 1x readings
 * on a fan in service, 2 % of speed keeps a fan clear of large response changes away from
 * resonance, and a condition number of 10 means reading errors can be amplified tenfold in the
 * corrections.
 */
export const DEFAULT_SOLVE_OPTIONS: SolveOptions = {
  trialMinAmpPct: 30,
  trialMinPhaseDeg: 30,
  trialNothingPct: 5,
  speedTolerancePct: 2,
  conditionWarn: 10,
  conditionLimit: 1e6,
  misfitWarnPct: 15,
};

function fmt(x: number, digits = 1): string {
  return x.toFixed(digits);
}

function list(names: readonly string[]): string {
  return names.join(', ');
}

function runName(job: BalanceJob, j: number): string {
  const label = job.runs[j]?.label;
  return label ? `runs[${j}] ("${label}")` : `runs[${j}]`;
}

/** Sum of the weights each plane carries in a run, internal frame. */
function planeSums(job: BalanceJob, j: number): Complex[] {
  const sums = job.planes.map(() => ZERO);
  for (const w of job.runs[j]!.weights) {
    const p = job.planes.indexOf(w.plane);
    sums[p] = add(sums[p]!, fromPolar(w.mass_g, toInternalDeg(w.angle_deg, job.angle_convention)));
  }
  return sums;
}

function reading(job: BalanceJob, j: number, sensor: string): Complex {
  const r = job.runs[j]!.readings[sensor]!;
  return fromPolar(r.amp, r.phase_deg);
}

export interface TrialMove {
  readonly amp_change_pct: number;
  readonly phase_change_deg: number;
  readonly vector_change_pct: number;
  readonly moved_enough: boolean;
}

/**
 * How far a trial run moved one sensor's 1x vector from as found, and whether that is enough by the
 * rule of thumb (common practice): at least 30 % in amplitude or 30 degrees in phase.
 */
export function trialMove(
  asFound: Reading,
  withTrial: Reading,
  options: Partial<SolveOptions> = {},
): TrialMove {
  const opt = { ...DEFAULT_SOLVE_OPTIONS, ...options };
  const v0 = fromPolar(asFound.amp, asFound.phase_deg);
  const v1 = fromPolar(withTrial.amp, withTrial.phase_deg);
  const base = Math.max(asFound.amp, 1e-12);
  const ampPct = ((withTrial.amp - asFound.amp) / base) * 100;
  const phase = deltaDeg(withTrial.phase_deg, asFound.phase_deg);
  return {
    amp_change_pct: ampPct,
    phase_change_deg: phase,
    vector_change_pct: (abs(sub(v1, v0)) / base) * 100,
    moved_enough: Math.abs(ampPct) >= opt.trialMinAmpPct || Math.abs(phase) >= opt.trialMinPhaseDeg,
  };
}

function vectorOut(sensor: string, v: Complex): SensorVector {
  return { sensor, amp: abs(v), phase_deg: argDeg(v) };
}

export function solveBalanceJob(
  job: BalanceJob,
  options: Partial<SolveOptions> = {},
): BalanceResult {
  const opt = { ...DEFAULT_SOLVE_OPTIONS, ...options };
  const conv: AngleConvention = job.angle_convention;
  const planes = job.planes;
  const sensors = Object.keys(job.runs[0]!.readings);
  const P = planes.length;
  const S = sensors.length;
  const warnings: Issue[] = [];
  const problems: Issue[] = [];
  const v0 = sensors.map((s) => reading(job, 0, s));

  // Speeds.
  const speeds = job.runs.map((r) => r.speed_rpm);
  const known = speeds.filter((x): x is number => x !== undefined);
  const speedRpm = known.length ? known.reduce((a, b) => a + b, 0) / known.length : null;
  if (known.length) {
    const ref = speeds[0] ?? known[0]!;
    const off = speeds
      .map((sp, j) => ({ sp, j }))
      .filter(
        (x): x is { sp: number; j: number } =>
          x.sp !== undefined && (Math.abs(x.sp - ref) / ref) * 100 > opt.speedTolerancePct,
      );
    if (off.length) {
      warnings.push({
        code: 'speed_mismatch',
        message:
          `runs at different speeds: ` +
          `${off.map((x) => `${runName(job, x.j)} at ${fmt(x.sp, 0)} r/min`).join(', ')} ` +
          `against ${fmt(ref, 0)} r/min as found (more ` +
          `than ${opt.speedTolerancePct} % apart)`,
        hint:
          'influence coefficients change with speed: repeat those runs ' +
          'at the as-found speed, or treat the corrections with caution',
      });
    }
    if (known.length < job.runs.length) {
      warnings.push({
        code: 'speed_missing',
        message:
          `${job.runs.length - known.length} of ${job.runs.length} runs ` +
          `carry no speed_rpm, so their speed could not be checked`,
        hint: 'record the speed of every run',
      });
    }
  }

  // Trial checks and the runs that carry weights.
  const trialChecks: TrialCheck[] = [];
  const weighted: number[] = [];
  for (let j = 1; j < job.runs.length; j++) {
    const sums = planeSums(job, j);
    const carries = sums.some((z) => abs(z) > 0);
    const label = job.runs[j]!.label;
    const checks = sensors.map((s): TrialCheck => ({
      run: j,
      ...(label !== undefined ? { label } : {}),
      sensor: s,
      ...trialMove(job.runs[0]!.readings[s]!, job.runs[j]!.readings[s]!, opt),
    }));
    const largest = checks.reduce((a, b) => (b.vector_change_pct > a.vector_change_pct ? b : a));
    if (!carries) {
      if (largest.vector_change_pct > 2 * opt.trialNothingPct) {
        warnings.push({
          code: 'not_repeatable',
          message:
            `${runName(job, j)} lists no weights, so it repeats the as-found run, yet its ` +
            `1x vector differs by ${fmt(largest.vector_change_pct)} % at ${largest.sensor}`,
          hint:
            'the readings are not repeatable (speed, load, temperature or a loose ' +
            'sensor?): settle the machine and repeat before trusting any correction',
        });
      }
      continue;
    }
    weighted.push(j);
    trialChecks.push(...checks);
    if (largest.vector_change_pct >= opt.trialNothingPct && !checks.some((c) => c.moved_enough)) {
      warnings.push({
        code: 'trial_small_effect',
        message:
          `${runName(job, j)} moved no sensor's 1x vector by ${opt.trialMinAmpPct} % ` +
          `in amplitude or ${opt.trialMinPhaseDeg} degrees in phase (largest change ` +
          `${fmt(largest.vector_change_pct)} % at ${largest.sensor})`,
        hint:
          'the correction is sensitive to reading scatter: a larger ' +
          'trial weight gives a more reliable result (common practice)',
      });
    }
  }

  // Influence coefficients.
  let H: CMatrix | null = null;
  let method: BalanceResult['method'] = null;
  let trialCond: number | null = null;
  if (weighted.length) {
    method = 'trial_runs';
    const R = weighted.length;
    const T = cmatrix(R, P);
    const dV = cmatrix(R, S);
    weighted.forEach((j, r) => {
      planeSums(job, j).forEach((z, p) => setEl(T, r, p, z));
      sensors.forEach((s, k) => setEl(dV, r, k, sub(reading(job, j, s), v0[k]!)));
    });
    const bare = planes.filter((_, p) => weighted.every((_j, r) => abs(getEl(T, r, p)) === 0));
    trialCond = columnScaledConditionNumber(T);
    if (bare.length) {
      problems.push({
        code: 'plane_without_trial',
        message:
          `plane(s) ${list(bare)} carry no weight in any ` +
          `run, so their influence cannot be measured`,
        hint: `add a trial run with a weight in ${list(bare)}, or solve a job with fewer planes`,
      });
    } else if (R < P || trialCond >= opt.conditionLimit) {
      problems.push({
        code: 'trial_runs_not_independent',
        message:
          `the ${R} run(s) with weights do not separate the ${P} planes (trial-weight ` +
          `matrix ${R < P ? `has ${R} row(s) for ${P} planes` : 'is singular'})`,
        hint:
          'give each plane its own trial run (or static ' +
          'and couple pairs), not the same weights twice',
      });
    } else {
      if (trialCond > opt.conditionWarn) {
        warnings.push({
          code: 'trial_runs_ill_conditioned',
          message: `the trial runs barely separate the planes (condition number ${fmt(trialCond)})`,
          hint:
            'errors in the readings are amplified in the coefficients: ' +
            'use trial weights that differ clearly between planes',
        });
      }
      const X = leastSquares(T, dV); // P x S
      H = cmatrix(S, P);
      for (let k = 0; k < S; k++) for (let p = 0; p < P; p++) setEl(H, k, p, getEl(X, p, k));
      // Did each plane's trial weight change anything measurable? (Per plane, not per run, so a
      // trial weight left in from an earlier run cannot hide a later one that did nothing.)
      for (let p = 0; p < P; p++) {
        let tMax = 0;
        for (let r = 0; r < R; r++) tMax = Math.max(tMax, abs(getEl(T, r, p)));
        let best = 0;
        let at = sensors[0]!;
        for (let k = 0; k < S; k++) {
          const pct = ((abs(getEl(H, k, p)) * tMax) / Math.max(abs(v0[k]!), 1e-12)) * 100;
          if (pct > best) [best, at] = [pct, sensors[k]!];
        }
        if (best < opt.trialNothingPct) {
          const runs = weighted
            .filter((_j, r) => abs(getEl(T, r, p)) > 0)
            .map((j) => runName(job, j));
          problems.push({
            code: 'trial_no_effect',
            message:
              `the trial weight in ${planes[p]} (${list(runs)}) changed the ` +
              `1x vectors by less than ${opt.trialNothingPct} % (largest ` +
              `${fmt(best)} % at ${at}): it had no measurable effect`,
            hint:
              'check the weight is where the job says, then repeat with a ' +
              'larger trial weight (see `turnwise balance trial-weight`)',
          });
        }
      }
      if (R > P) {
        const fit = cmul(T, X);
        for (let k = 0; k < S; k++) {
          let res = 0;
          let tot = 0;
          for (let r = 0; r < R; r++) {
            res += abs(sub(getEl(dV, r, k), getEl(fit, r, k))) ** 2;
            tot += abs(getEl(dV, r, k)) ** 2;
          }
          const pct = tot > 0 ? Math.sqrt(res / tot) * 100 : 0;
          if (pct > opt.misfitWarnPct) {
            warnings.push({
              code: 'runs_disagree',
              message:
                `at ${sensors[k]} the ${R} runs with weights ` +
                `disagree with one linear response by ${fmt(pct)} %`,
              hint:
                'a run may be mis-recorded (weight, angle or plane) or the machine is ' +
                'not linear at this speed: check the runs before using the corrections',
            });
          }
        }
      }
    }
    if (job.influence_coefficients) {
      warnings.push({
        code: 'coefficients_ignored',
        message:
          'the job has its own runs with weights, so the ' +
          'given influence_coefficients were not used',
        hint: 'remove the trial runs to do a trim run from the given coefficients',
      });
    }
  } else if (job.influence_coefficients) {
    method = 'given_coefficients';
    const cs = job.coefficients_speed_rpm;
    if (
      cs !== undefined &&
      speedRpm !== null &&
      (Math.abs(speedRpm - cs) / cs) * 100 > opt.speedTolerancePct
    ) {
      warnings.push({
        code: 'speed_mismatch',
        message:
          `the given influence coefficients were measured at ` +
          `${fmt(cs, 0)} r/min but this run is at ${fmt(speedRpm, 0)} r/min ` +
          `(more than ${opt.speedTolerancePct} % apart)`,
        hint: 'run the fan at the speed the coefficients were measured at, or do fresh trial runs',
      });
    }
    H = cmatrix(S, P);
    for (let k = 0; k < S; k++) {
      for (let p = 0; p < P; p++) {
        const c = job.influence_coefficients[sensors[k]!]![planes[p]!]!;
        setEl(H, k, p, fromPolar(c.amp_per_g, c.phase_deg));
      }
    }
  } else {
    problems.push({
      code: 'no_trial_runs',
      message: 'the job has only the as-found run and no influence coefficients',
      hint:
        'add trial runs, or give known coefficients (`--coefficients ' +
        'FILE`, e.g. the stored balance/coefficients.json) for a trim run',
    });
  }

  const coefficients: CoefficientOut[] = [];
  if (H) {
    for (let k = 0; k < S; k++) {
      for (let p = 0; p < P; p++) {
        const h = getEl(H, k, p);
        coefficients.push({
          sensor: sensors[k]!,
          plane: planes[p]!,
          amp_per_g: abs(h),
          phase_deg: argDeg(h),
        });
      }
    }
  }

  let hCond: number | null = null;
  if (H && !problems.length) {
    hCond = columnScaledConditionNumber(H);
    if (S < P) {
      problems.push({
        code: 'fewer_readings_than_planes',
        message:
          `${S} sensor reading${S === 1 ? '' : 's'} per run (${list(sensors)}) ` +
          `for ${P} planes (${list(planes)}): ${P} unknown weights need at least ` +
          `${P} independent readings, so the corrections are not determined`,
        hint:
          `add readings from ${P - S} more sensor${P - S === 1 ? '' : 's'} at another ` +
          `bearing to every run, or solve for ${S === 1 ? 'one plane' : `${S} planes`}`,
      });
    } else if (hCond >= opt.conditionLimit) {
      problems.push({
        code: 'singular',
        message:
          `the influence matrix is singular (condition number ` +
          `${Number.isFinite(hCond) ? hCond.toExponential(1) : 'infinite'}): ` +
          `the sensors do not tell the planes apart`,
        hint:
          'use sensors at different bearings (H and V at one bearing are not ' +
          'independent), or move the trial weights to planes further apart',
      });
    } else if (hCond > opt.conditionWarn) {
      warnings.push({
        code: 'ill_conditioned',
        message:
          `the influence matrix is badly conditioned (condition number ` +
          `${fmt(hCond)}): a 5 % error in the readings can change the ` +
          `corrections by up to about ${fmt(5 * hCond, 0)} %`,
        hint:
          'use sensors at different bearings or planes further apart; for ' +
          'a short rotor a single-plane correction may be the honest answer',
      });
    }
  }

  const asFound = sensors.map((s, k) => vectorOut(s, v0[k]!));
  const base = {
    angle_convention: conv,
    convention: conventionText(conv),
    amp_unit: job.amp_unit ?? null,
    planes,
    sensors,
    method,
    influence_coefficients: coefficients,
    as_found: asFound,
    trial_checks: trialChecks,
    condition_number: hCond,
    trial_condition_number: trialCond,
    speed_rpm: speedRpm,
    warnings,
  };
  if (problems.length || !H) {
    return {
      ...base,
      ok: false,
      corrections: [],
      corrections_trials_left_in: [],
      static_couple: null,
      predicted_residuals: [],
      unbalance: null,
      problems,
    };
  }

  const V0 = cmatrix(S, 1);
  v0.forEach((z, k) => setEl(V0, k, 0, neg(z)));
  const Cm = leastSquares(H, V0);
  const C = planes.map((_, p) => getEl(Cm, p, 0));
  const HC = cmul(H, Cm);
  // Round-off below a billionth of the largest reading is shown as zero (its phase means nothing).
  const scaleAmp = Math.max(...v0.map(abs));
  const residuals = sensors.map((s, k) => {
    const v = add(v0[k]!, getEl(HC, k, 0));
    return abs(v) <= 1e-9 * scaleAmp ? { sensor: s, amp: 0, phase_deg: 0 } : vectorOut(s, v);
  });
  const left = planeSums(job, job.runs.length - 1);
  const D = C.map((c, p) => sub(c, left[p]!));

  const planeWeight = (plane: string, z: Complex): PlaneWeight => {
    const mass = abs(z);
    const r = job.radius_mm?.[plane];
    const max = job.max_mass_g?.[plane];
    return {
      plane,
      mass_g: mass,
      angle_deg: fromInternalDeg(argDeg(z), conv),
      ...(r !== undefined ? { unbalance_g_mm: mass * r } : {}),
      ...(r !== undefined && speedRpm !== null
        ? { force_n: centrifugalForceN(mass, r, speedRpm) }
        : {}),
      ...(max !== undefined ? { over_max: mass > max } : {}),
    };
  };
  const corrections = planes.map((p, i) => planeWeight(p, C[i]!));
  const leftIn = planes.map((p, i) => planeWeight(p, D[i]!));
  for (const w of corrections) {
    if (w.over_max) {
      warnings.push({
        code: 'over_max_mass',
        message:
          `the correction for ${w.plane} is ${fmt(w.mass_g)} g, more than the ` +
          `${fmt(job.max_mass_g![w.plane]!)} g this plane takes (max_mass_g.${w.plane})`,
        hint:
          'check the runs first (a weak trial response inflates ' +
          'corrections); then spread the weight over several positions ' +
          'or fit it at a larger radius (`turnwise balance split`)',
      });
    }
  }

  let staticCouple: StaticCouple | null = null;
  if (P === 2) {
    const st = scale(add(C[0]!, C[1]!), 0.5);
    const cp = scale(sub(C[0]!, C[1]!), 0.5);
    const cpAngle = fromInternalDeg(argDeg(cp), conv);
    staticCouple = {
      static_pair: { mass_g_each: abs(st), angle_deg: fromInternalDeg(argDeg(st), conv) },
      couple_pair: {
        mass_g_each: abs(cp),
        angle_deg_first_plane: cpAngle,
        angle_deg_second_plane: (cpAngle + 180) % 360,
      },
    };
  }

  let unbalance: UnbalanceReport | null = null;
  const radii = job.radius_mm;
  if (radii && planes.every((p) => radii[p] !== undefined)) {
    const asFoundU = Object.fromEntries(planes.map((p, i) => [p, abs(C[i]!) * radii[p]!]));
    const lastU = Object.fromEntries(planes.map((p, i) => [p, abs(D[i]!) * radii[p]!]));
    const per =
      job.rotor_mass_kg !== undefined && job.grade_mm_s !== undefined && speedRpm !== null
        ? permissibleUnbalanceGmm(job.grade_mm_s, job.rotor_mass_kg, speedRpm)
        : null;
    const allocation = per === null ? null : allocatePermissible(per, planes, job.geometry);
    if (allocation) warnings.push(...allocation.warnings.filter((w) => w.code !== 'share_bounded'));
    unbalance = {
      as_found_g_mm: asFoundU,
      last_run_g_mm: lastU,
      permissible_g_mm: per,
      permissible_per_plane_g_mm: per === null ? null : per / P,
      permissible_by_plane_g_mm: allocation ? allocation.by_plane_g_mm : null,
      allocation,
      last_run_within_grade:
        allocation === null ? null : planes.every((p) => lastU[p]! <= allocation.by_plane_g_mm[p]!),
    };
  }

  return {
    ...base,
    ok: true,
    corrections,
    corrections_trials_left_in: leftIn,
    static_couple: staticCouple,
    predicted_residuals: residuals,
    unbalance,
    problems: [],
  };
}

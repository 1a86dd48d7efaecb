/**
 * Amplitude-only single-plane balancing: the four-run method (as found, then one trial weight at
 * three or more positions in turn, at one radius). For when the once-per-turn pickup cannot be
 * mounted or has failed, so only 1x amplitudes are known. Pure: input in, result out.
 *
 * GEOMETRY. Let V0 be the as-found 1x vector (amplitude A0, phase unknown) and H the 1x vector a
 * 1 g weight on the reference mark adds. With the trial mass m at internal angle theta_k (see
 * conventions.ts) the reading is A_k = |V0 + H m e^(i theta_k)|. Write V0 / H = (A0 / |H|) e^(i
 * alpha) and t = |H| m (the trial effect, in amplitude units). Then, because |z| = |conj z|,
 *
 *   A_k = | A0 e^(i theta_k) - P |   with   P = -t e^(i alpha)
 *
 * which is the classic construction: draw the as-found circle of radius A0, mark the trial
 * positions c_k = A0 e^(i theta_k) on it, draw a circle of radius A_k round each; they meet at P.
 * The correction that cancels V0 is W = -V0 / H = m (A0 / t) e^(i (alpha + 180)), i.e.
 *
 *   mass = m * A0 / |P|,   angle = arg P (the angle of the point where the circles meet).
 *
 * Only angles RELATIVE to the trial positions enter, so the construction reads the same in both
 * angle conventions: the correction angle is counted from the reference mark in the same direction
 * as the trial angles were. (The code still converts through the internal frame like every other
 * balancing routine; the mapping is a mirror image, under which amplitudes do not change.)
 *
 * SOLUTION. Three trial circles seldom meet in one point (reading scatter), so P is found by least
 * squares over its two coordinates (equivalently |T| and the angle of V0 in the trial frame):
 * minimise sum_k (|c_k - P| - A_k)^2 by damped Gauss-Newton from several starting points (the
 * radical-centre solution of the linearised equations and a polar grid), keeping the best minimum.
 * A second, distinct minimum that fits about as well is reported as an ambiguity, never guessed.
 */
import { argDeg, fromPolar, wrapDeg } from './complex.js';
import {
  type AngleConvention,
  conventionText,
  fromInternalDeg,
  toInternalDeg,
} from './conventions.js';
import type { Issue } from './job.js';
import { centrifugalForceN } from './weights.js';

export interface FourRunTrial {
  /** Trial weight position, degrees from the reference mark, in the job's convention. */
  readonly angle_deg: number;
  /** 1x amplitude with the trial weight there, job unit. */
  readonly amp: number;
}

export interface FourRunInput {
  /** 1x amplitude as found, job unit (any one unit for all readings, e.g. mm/s pk). */
  readonly as_found: number;
  readonly trial_mass_g: number;
  readonly trials: readonly FourRunTrial[];
  readonly angle_convention: AngleConvention;
  readonly amp_unit?: string;
  /** Radius of the trial (and correction) weight, mm: gives unbalance and force. */
  readonly radius_mm?: number;
  readonly speed_rpm?: number;
  /** Scatter of one amplitude reading, % of the as-found amplitude (default 5). */
  readonly amp_scatter_pct?: number;
  readonly sensor?: string;
}

export interface FourRunOptions {
  /**
   * Default scatter of a repeated 1x amplitude reading, % of as found (this project's choice: 5).
   */
  readonly ampScatterPct: number;
  /** Trial effect below this share of as found gets a warning (common practice: 30 %). */
  readonly trialMinPct: number;
  /** Fit residual (r.m.s. over the trial runs) above this, % of as found, gets a warning. */
  readonly misfitWarnPct: number;
  /** 1-sigma uncertainty of the correction angle above this gets a warning, degrees. */
  readonly angleWarnDeg: number;
  /** ... above this no correction is given, degrees. */
  readonly angleLimitDeg: number;
}

/**
 * Defaults: 5 % is about the scatter of repeated 1x readings on a fan in service (as in solve.ts);
 * 30 % is the usual trial-effect rule (common practice); the others are this project's choices: a
 * weight whose angle is uncertain by more than 30 degrees (1 sigma) can miss by 60 and leave the
 * fan worse, so it is not given; 10 % of as found is twice the reading scatter.
 */
export const DEFAULT_FOUR_RUN_OPTIONS: FourRunOptions = {
  ampScatterPct: 5,
  trialMinPct: 30,
  misfitWarnPct: 10,
  angleWarnDeg: 10,
  angleLimitDeg: 30,
};

export interface FourRunTrialFit {
  readonly angle_deg: number;
  readonly measured_amp: number;
  /** Distance from the trial point c_k to the fitted P: the amplitude the fit expects. */
  readonly fitted_amp: number;
}

export interface FourRunResult {
  readonly ok: boolean;
  readonly method: 'four_run_amplitude_only';
  readonly angle_convention: AngleConvention;
  readonly convention: string;
  readonly amp_unit: string | null;
  readonly sensor: string | null;
  readonly as_found: number;
  readonly trial_mass_g: number;
  /** Weight to fit with the trial weight removed, relative to as found. */
  readonly correction: {
    readonly mass_g: number;
    readonly angle_deg: number;
    readonly unbalance_g_mm?: number;
    readonly force_n?: number;
  } | null;
  /**
   * One standard deviation of the correction at the reading scatter used (assumed or, if larger,
   * seen in the fit).
   */
  readonly correction_uncertainty: {
    readonly mass_g: number;
    readonly angle_deg: number;
    readonly scatter_amp: number;
  } | null;
  /**
   * The 1x vector the trial weight alone adds: |P|, per gram, and as a share of the as-found
   * amplitude.
   */
  readonly trial_effect: {
    readonly amp: number;
    readonly amp_per_g: number;
    readonly pct_of_as_found: number;
  } | null;
  /**
   * Where the circles meet (least squares), in the plot's amplitude units; its angle is the
   * correction angle.
   */
  readonly intersection: {
    readonly x: number;
    readonly y: number;
    readonly radius: number;
    readonly angle_deg: number;
  } | null;
  /**
   * How far the circles miss one common point: r.m.s. of (fitted - measured) over the trial runs.
   */
  readonly fit_residual: {
    readonly rms_amp: number;
    readonly pct_of_as_found: number;
    readonly trials: readonly FourRunTrialFit[];
  } | null;
  readonly warnings: readonly Issue[];
  readonly problems: readonly Issue[];
}

interface Pt {
  x: number;
  y: number;
}

function cost(c: readonly Pt[], a: readonly number[], p: Pt): number {
  let s = 0;
  for (let k = 0; k < c.length; k++) s += (Math.hypot(c[k]!.x - p.x, c[k]!.y - p.y) - a[k]!) ** 2;
  return s;
}

/** Damped Gauss-Newton (Levenberg-Marquardt) on the two coordinates of P. */
function refine(c: readonly Pt[], a: readonly number[], start: Pt, scale: number): Pt {
  let p = { ...start };
  let f = cost(c, a, p);
  let lambda = 1e-3;
  for (let it = 0; it < 200; it++) {
    let jtj00 = 0;
    let jtj01 = 0;
    let jtj11 = 0;
    let g0 = 0;
    let g1 = 0;
    for (let k = 0; k < c.length; k++) {
      const dx = p.x - c[k]!.x;
      const dy = p.y - c[k]!.y;
      const d = Math.max(Math.hypot(dx, dy), 1e-12 * scale);
      const jx = dx / d;
      const jy = dy / d;
      const r = d - a[k]!;
      jtj00 += jx * jx;
      jtj01 += jx * jy;
      jtj11 += jy * jy;
      g0 += jx * r;
      g1 += jy * r;
    }
    let improved = false;
    for (let tries = 0; tries < 30; tries++) {
      const m00 = jtj00 * (1 + lambda) + 1e-15;
      const m11 = jtj11 * (1 + lambda) + 1e-15;
      const det = m00 * m11 - jtj01 * jtj01;
      if (!(Math.abs(det) > 0)) {
        lambda *= 10;
        continue;
      }
      const sx = -(m11 * g0 - jtj01 * g1) / det;
      const sy = -(m00 * g1 - jtj01 * g0) / det;
      const q = { x: p.x + sx, y: p.y + sy };
      const fq = cost(c, a, q);
      if (fq <= f) {
        const step = Math.hypot(sx, sy);
        p = q;
        const df = f - fq;
        f = fq;
        lambda = Math.max(lambda / 3, 1e-9);
        improved = true;
        if (step < 1e-13 * scale || df <= 1e-16 * scale * scale) return p;
        break;
      }
      lambda *= 4;
    }
    if (!improved) return p;
  }
  return p;
}

/**
 * The radical-centre start: |c_k - P|^2 = A_k^2 is linear in (|P|^2, x, y) as
 *   |P|^2 - 2 (c_k.x x + c_k.y y) = A_k^2 - A0^2,
 * solved by least squares over all trials (exact for three distinct positions). null when the
 * positions do not fix it.
 */
function linearStart(c: readonly Pt[], a: readonly number[], a0: number): Pt | null {
  // Normal equations of the n x 3 system [1, -2cx, -2cy] [u x y]^T = A^2 - A0^2.
  const m = [0, 0, 0, 0, 0, 0, 0, 0, 0];
  const b = [0, 0, 0];
  for (let k = 0; k < c.length; k++) {
    const row = [1, -2 * c[k]!.x, -2 * c[k]!.y];
    const rhs = a[k]! ** 2 - a0 * a0;
    for (let i = 0; i < 3; i++) {
      b[i]! += row[i]! * rhs;
      for (let j = 0; j < 3; j++) m[i * 3 + j]! += row[i]! * row[j]!;
    }
  }
  const det3 = (q: number[]) =>
    q[0]! * (q[4]! * q[8]! - q[5]! * q[7]!) -
    q[1]! * (q[3]! * q[8]! - q[5]! * q[6]!) +
    q[2]! * (q[3]! * q[7]! - q[4]! * q[6]!);
  const d = det3(m);
  if (!(Math.abs(d) > 1e-12 * (a0 ** 4 + 1e-300))) return null;
  const col = (j: number) => m.map((v, i) => (i % 3 === j ? b[Math.floor(i / 3)]! : v));
  return { x: det3(col(1)) / d, y: det3(col(2)) / d };
}

function fmt(x: number, digits = 1): string {
  return x.toFixed(digits);
}

export function solveFourRun(
  input: FourRunInput,
  options: Partial<FourRunOptions> = {},
): FourRunResult {
  const opt = { ...DEFAULT_FOUR_RUN_OPTIONS, ...options };
  const conv = input.angle_convention;
  const a0 = input.as_found;
  const m = input.trial_mass_g;
  const scatterPct = input.amp_scatter_pct ?? opt.ampScatterPct;
  const sigma = (scatterPct / 100) * a0;
  const warnings: Issue[] = [];
  const problems: Issue[] = [];
  const unit = input.amp_unit ?? 'job unit';

  const theta = input.trials.map((t) => toInternalDeg(t.angle_deg, conv));
  const amps = input.trials.map((t) => t.amp);
  const c: Pt[] = theta.map((th) => {
    const z = fromPolar(a0, th);
    return { x: z.re, y: z.im };
  });

  const base = {
    method: 'four_run_amplitude_only' as const,
    angle_convention: conv,
    convention: conventionText(conv),
    amp_unit: input.amp_unit ?? null,
    sensor: input.sensor ?? null,
    as_found: a0,
    trial_mass_g: m,
  };
  const refused = (): FourRunResult => ({
    ...base,
    ok: false,
    correction: null,
    correction_uncertainty: null,
    trial_effect: null,
    intersection: null,
    fit_residual: null,
    warnings,
    problems,
  });

  // Amplitudes that do not move: every trial reading equals the as-found one within the scatter.
  const spread = Math.max(
    ...amps.map((x) => Math.abs(x - a0)),
    Math.max(...amps) - Math.min(...amps),
  );
  if (spread <= 2 * sigma) {
    problems.push({
      code: 'trial_no_effect',
      message:
        `the trial amplitudes (${amps.map((x) => fmt(x, 2)).join(', ')} ${unit}) ` +
        `and the as-found ${fmt(a0, 2)} differ by at most ${fmt(spread, 2)}, within ` +
        `twice the reading scatter (${fmt(scatterPct, 0)} % of as ` +
        `found = ${fmt(sigma, 2)}): they do not fix where the weight goes`,
      hint:
        'fit a larger trial weight (`turnwise balance trial-weight` gives ' +
        'the usual size) and repeat the three trial runs; check the ' +
        'weight really was on the rotor and the fan ran at the same speed',
    });
    return refused();
  }

  // Least squares from several starts.
  const scale = Math.max(a0, ...amps);
  const starts: Pt[] = [];
  const lin = linearStart(c, amps, a0);
  if (lin && Number.isFinite(lin.x) && Number.isFinite(lin.y)) starts.push(lin);
  for (const r of [0.2, 0.5, 1, 1.5, 2.5])
    for (let deg = 0; deg < 360; deg += 30)
      starts.push({
        x: r * scale * Math.cos((deg * Math.PI) / 180),
        y: r * scale * Math.sin((deg * Math.PI) / 180),
      });
  const minima: { p: Pt; f: number }[] = [];
  for (const s of starts) {
    const p = refine(c, amps, s, scale);
    const f = cost(c, amps, p);
    if (!minima.some((q) => Math.hypot(q.p.x - p.x, q.p.y - p.y) < 1e-4 * scale))
      minima.push({ p, f });
  }
  minima.sort((x, y) => x.f - y.f);
  const best = minima[0]!;
  const P = best.p;
  const n = c.length;
  const rmsMisfit = Math.sqrt(best.f / n);
  const radius = Math.hypot(P.x, P.y);

  // A second distinct minimum that fits about as well: the readings allow two answers.
  const rival = minima
    .slice(1)
    .find(
      (q) =>
        Math.hypot(q.p.x - P.x, q.p.y - P.y) > 0.1 * a0 &&
        Math.sqrt(q.f / n) <= rmsMisfit + 0.5 * sigma,
    );
  if (rival) {
    const ang = (p: Pt) => fromInternalDeg(argDeg({ re: p.x, im: p.y }), conv);
    problems.push({
      code: 'ambiguous',
      message:
        `two points fit the circles about equally well (correction ` +
        `angles ${fmt(ang(P))} and ${fmt(ang(rival.p))} deg): the ` +
        `trial positions do not tell them apart`,
      hint:
        'put the trial weight at positions spread round the rotor (0, ' +
        '120, 240 deg) and repeat; a fourth trial position settles it',
    });
  }

  // Uncertainty: covariance sigma_eff^2 (J^T J)^-1 of P, propagated to mass and angle.
  let jtj00 = 0;
  let jtj01 = 0;
  let jtj11 = 0;
  for (const ck of c) {
    const dx = P.x - ck.x;
    const dy = P.y - ck.y;
    const d = Math.hypot(dx, dy) || 1e-300;
    jtj00 += (dx / d) ** 2;
    jtj01 += (dx / d) * (dy / d);
    jtj11 += (dy / d) ** 2;
  }
  const det = jtj00 * jtj11 - jtj01 * jtj01;
  // Residual-based scatter (n - 2 degrees of freedom) when it is larger than the assumed one.
  const seen = n > 2 ? Math.sqrt(best.f / (n - 2)) : 0;
  const sEff = Math.max(sigma, seen);
  let angleSd = Infinity;
  let massSd = Infinity;
  if (det > 1e-12 && radius > 0) {
    const cxx = (sEff * sEff * jtj11) / det;
    const cyy = (sEff * sEff * jtj00) / det;
    const cxy = (-sEff * sEff * jtj01) / det;
    const gx = P.x / radius;
    const gy = P.y / radius;
    const varR = gx * gx * cxx + 2 * gx * gy * cxy + gy * gy * cyy;
    const hx = -P.y / (radius * radius);
    const hy = P.x / (radius * radius);
    const varA = hx * hx * cxx + 2 * hx * hy * cxy + hy * hy * cyy;
    // The as-found reading scatters too: it moves every trial point radially. Its effect is found
    // by solving again with the as-found amplitude one scatter higher (a numerical derivative).
    const a1 = a0 + sigma;
    const c1 = c.map((ck) => ({ x: (ck.x * a1) / a0, y: (ck.y * a1) / a0 }));
    const P1 = refine(c1, amps, P, scale);
    const r1 = Math.hypot(P1.x, P1.y);
    const dAng = r1 > 0 ? Math.atan2(P.x * P1.y - P.y * P1.x, P.x * P1.x + P.y * P1.y) : Math.PI;
    angleSd = (Math.sqrt(Math.max(varA, 0) + dAng * dAng) * 180) / Math.PI;
    const mass = (m * a0) / radius;
    const dMassRel = r1 > 0 ? (a1 / r1 - a0 / radius) / (a0 / radius) : Infinity;
    massSd = mass * Math.sqrt(dMassRel * dMassRel + Math.max(varR, 0) / (radius * radius));
  }

  const effectPct = (radius / a0) * 100;
  const fits: FourRunTrialFit[] = input.trials.map((t, k) => ({
    angle_deg: wrapDeg(t.angle_deg),
    measured_amp: t.amp,
    fitted_amp: Math.hypot(c[k]!.x - P.x, c[k]!.y - P.y),
  }));
  const misfitPct = (rmsMisfit / a0) * 100;

  if (radius <= 3 * sigma || !Number.isFinite(angleSd) || angleSd > opt.angleLimitDeg) {
    problems.push({
      code: 'not_determined',
      message:
        `the readings do not fix the correction: the trial effect ` +
        `is ${fmt(radius, 2)} ${unit} (${fmt(effectPct, 0)} % of ` +
        `as found) and the correction angle is uncertain by ` +
        `${Number.isFinite(angleSd) ? `${fmt(angleSd, 0)} deg` : 'an unbounded amount'} (1 ` +
        `sigma at a reading scatter of ${fmt(sEff, 2)} ${unit}; limit ` +
        `${opt.angleLimitDeg} deg)`,
      hint:
        'fit a larger trial weight and repeat the trial runs at the same speed ' +
        'and load; spread the positions round the rotor (0, 120, 240 deg)',
    });
  } else if (angleSd > opt.angleWarnDeg) {
    warnings.push({
      code: 'angle_uncertain',
      message:
        `the correction angle is uncertain by about ${fmt(angleSd, 0)} deg ` +
        `(1 sigma) at a reading scatter of ${fmt(sEff, 2)} ${unit}`,
      hint: 'fit it, then do a check run; a larger trial weight gives a firmer answer',
    });
  }
  if (misfitPct > opt.misfitWarnPct) {
    warnings.push({
      code: 'circles_disagree',
      message:
        `the circles miss one common point by ${fmt(rmsMisfit, 2)} ${unit} r.m.s. ` +
        `(${fmt(misfitPct, 0)} % of as found): the readings disagree with one trial effect`,
      hint:
        'repeat the as-found run and any doubtful trial run at the same speed and ' +
        'load; check the trial radius and positions, that the sensor did not move, ' +
        'and that the 1x really is unbalance (steady, not resonance or looseness)',
    });
  }
  if (effectPct < opt.trialMinPct) {
    warnings.push({
      code: 'trial_small_effect',
      message:
        `the trial weight changed the vibration by ${fmt(effectPct, 0)} % of ` +
        `the as-found amplitude (less than the usual ${opt.trialMinPct} %)`,
      hint:
        'the correction is sensitive to reading scatter: a larger ' +
        'trial weight gives a more reliable result (common practice)',
    });
  }
  if (problems.length) return refused();

  const mass = (m * a0) / radius;
  const angle = fromInternalDeg(argDeg({ re: P.x, im: P.y }), conv);
  const r = input.radius_mm;
  return {
    ...base,
    ok: true,
    correction: {
      mass_g: mass,
      angle_deg: angle,
      ...(r !== undefined ? { unbalance_g_mm: mass * r } : {}),
      ...(r !== undefined && input.speed_rpm !== undefined
        ? { force_n: centrifugalForceN(mass, r, input.speed_rpm) }
        : {}),
    },
    correction_uncertainty: { mass_g: massSd, angle_deg: angleSd, scatter_amp: sEff },
    trial_effect: { amp: radius, amp_per_g: radius / m, pct_of_as_found: effectPct },
    intersection: { x: P.x, y: conv === 'against_rotation' ? P.y : -P.y, radius, angle_deg: angle },
    fit_residual: { rms_amp: rmsMisfit, pct_of_as_found: misfitPct, trials: fits },
    warnings,
    problems,
  };
}

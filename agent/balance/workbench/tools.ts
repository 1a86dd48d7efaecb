/**
 * The balancing calculators the live page offers beside a job (trial weight, split onto fixed
 * positions or between holes, combine, move to another radius, balance quality grade, the four-run
 * method without phase and the 1x amplitude it needs): each takes a request body,
 * checks it (ApiError 400 naming every problem) and answers with plain data in the units of its
 * field
 * names. Pure: the maths is agent/balance/weights.ts.
 */
import { z } from 'zod';
import type { WindowResult } from '../../dsp/types.js';
import { isUserError } from '../../errors.js';
import { oneXAmplitude } from '../amplitude.js';
import { solveFourRun } from '../four-run.js';
import { conventionText } from '../conventions.js';
import {
  parseCombineRequest,
  parseFourRun,
  parseSplitHolesRequest,
  parseSplitRequest,
} from '../job-input.js';
import { balancingCautions } from '../report.js';
import {
  centrifugalForceN,
  combineWeights,
  moveToRadius,
  parseGrade,
  permissibleUnbalanceGmm,
  splitBetweenHoles,
  splitOntoPositions,
  SplitRefused,
  STANDARD_GRAVITY,
  suggestTrialMassG,
} from '../weights.js';
import {
  ApiError,
  gradeSchema,
  moveRadiusSchema,
  parseBody,
  trialWeightSchema,
} from './requests.js';

/**
 * agent/balance's parsers throw UserError with every problem; the API answers 400 with the same
 * text.
 */
function parseWithBalance<T>(fn: () => T): T {
  try {
    return fn();
  } catch (e) {
    if (isUserError(e)) throw new ApiError(400, 'invalid_request', e.message, e.hint);
    throw e;
  }
}

/** A trial mass that gives a centrifugal force of `fraction` of the bearing's static load. */
export function trialWeightTool(body: unknown) {
  const q = parseBody(trialWeightSchema, body, 'trial-weight request');
  const load = q.bearing_load_kg ?? q.rotor_mass_kg! / q.bearings;
  const m = suggestTrialMassG(load, q.radius_mm, q.speed_rpm, q.fraction);
  return {
    mass_g: m,
    radius_mm: q.radius_mm,
    speed_rpm: q.speed_rpm,
    bearing_load_kg: load,
    bearing_load_n: load * STANDARD_GRAVITY,
    fraction: q.fraction,
    force_n: centrifugalForceN(m, q.radius_mm, q.speed_rpm),
    rule: 'm_t = fraction x M_b x g / (r x omega^2), fraction 0.1: common practice',
    cautions: balancingCautions(),
  };
}

/**
 * A weight split onto the two fixed positions either side of its angle (moved to their radius
 * first).
 */
export function splitTool(body: unknown) {
  if (body !== null && typeof body === 'object' && 'holes' in body) return splitHolesTool(body);
  const q = parseWithBalance(() => parseSplitRequest(body, 'split request'));
  const moved =
    q.radius_mm !== undefined && q.positions.radius_mm !== undefined
      ? moveToRadius(q.mass_g, q.radius_mm, q.positions.radius_mm)
      : q.mass_g;
  return {
    angle_convention: q.angle_convention,
    convention: conventionText(q.angle_convention),
    moved_mass_g: moved,
    weights: splitOntoPositions(moved, q.angle_deg, q.positions),
  };
}

/** Several weights as the one weight they add up to. */
export function combineTool(body: unknown) {
  const q = parseWithBalance(() => parseCombineRequest(body, 'combine request'));
  return {
    angle_convention: q.angle_convention,
    convention: conventionText(q.angle_convention),
    ...combineWeights(q.weights, q.to_radius_mm),
    radius_mm: q.to_radius_mm ?? null,
  };
}

/** The mass at another radius that gives the same unbalance. */
export function moveRadiusTool(body: unknown) {
  const q = parseBody(moveRadiusSchema, body, 'move-radius request');
  return {
    mass_g: moveToRadius(q.mass_g, q.from_radius_mm, q.to_radius_mm),
    radius_mm: q.to_radius_mm,
    rule: 'same unbalance m x r: mass x r_old / r_new',
  };
}

/**
 * The permissible residual unbalance of a balance quality grade, and whether a residual is within
 * it.
 */
export function gradeTool(body: unknown) {
  const q = parseBody(gradeSchema, body, 'grade request');
  const g = parseGrade(q.grade);
  const per = permissibleUnbalanceGmm(g, q.rotor_mass_kg, q.speed_rpm);
  return {
    grade_mm_s: g,
    permissible_g_mm: per,
    permissible_per_plane_g_mm: per / q.planes,
    residual_g_mm: q.residual_g_mm ?? null,
    within: q.residual_g_mm === undefined ? null : q.residual_g_mm <= per,
    rule: 'ISO 21940-11: U_per = 9549 x G x m / n (g mm), from memory: check the current edition',
  };
}

/** A weight split between two holes at any angles, or the two nearest either side from a list. */
function splitHolesTool(body: unknown) {
  const q = parseWithBalance(() => parseSplitHolesRequest(body, 'split request'));
  const moved =
    q.radius_mm !== undefined && q.holes.radius_mm !== undefined
      ? moveToRadius(q.mass_g, q.radius_mm, q.holes.radius_mm)
      : q.mass_g;
  try {
    const split = splitBetweenHoles(moved, q.angle_deg, q.holes.angles_deg);
    return {
      angle_convention: q.angle_convention,
      convention: conventionText(q.angle_convention),
      moved_mass_g: moved,
      ...split,
      cautions: balancingCautions(),
    };
  } catch (e) {
    if (e instanceof SplitRefused)
      throw new ApiError(400, e.code, `holes.angles_deg: ${e.message}`, e.hint);
    throw e;
  }
}

/**
 * Amplitude-only balancing (four-run method): correction, uncertainty, trial effect, fit residual.
 */
export function fourRunTool(body: unknown) {
  const q = parseWithBalance(() => parseFourRun(body, 'four-run request'));
  return { ...solveFourRun(q), cautions: balancingCautions() };
}

const oneXRequestSchema = z
  .object({
    sensor: z.string().min(1).max(32),
    speed_rpm: z
      .number()
      .positive('must be above 0')
      .max(60000)
      .describe('Running speed the technician states (handheld tachometer, drive display)'),
  })
  .strict();

/**
 * The 1x amplitude of one sensor in the latest analysis window, for the four-run method: the
 * synchronous 1x while the tach works, the spectral peak near the stated speed when it does not.
 */
export function oneXAmplitudeTool(
  body: unknown,
  window: { readonly window: WindowResult; readonly at_ms: number } | null,
) {
  const q = parseBody(oneXRequestSchema, body, '1x amplitude request');
  if (!window)
    throw new ApiError(
      409,
      'no_window',
      'no analysis window has been measured yet',
      'wait a few seconds with the fan at steady speed, then read again',
    );
  const a = parseWithBalance(() => oneXAmplitude(window.window, q.sensor, q.speed_rpm));
  return {
    ...a,
    window_end_ms: window.at_ms,
    window_s: (window.window.end_index - window.window.start_index) / window.window.sample_rate_hz,
    tach_revolutions: window.window.revolutions,
  };
}

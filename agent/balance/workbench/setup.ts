/**
 * Setting up a balancing job: the operator's request checked against this machine's config (its
 * sensors, the `balance` section's planes and defaults) and, for a trim job, against the stored
 * influence coefficients. Pure: request, config and stored coefficients in, the job's setup out, or
 * an ApiError naming every problem.
 */
import type { Config } from '../../config/schema.js';
import type { StoredCoefficients } from '../coefficients.js';
import { parseGrade } from '../weights.js';
import type { JobSetup, PlaneSetup } from './records.js';
import { PLANES_NEEDED } from './records.js';
import { ApiError, conflict, type CreateJobRequest } from './requests.js';

/**
 * The setup of a new job. `stored` is the fan's stored influence coefficients (only read for trim
 * jobs; null when none are stored).
 */
export function jobSetupFrom(
  req: CreateJobRequest,
  cfg: Config,
  stored: StoredCoefficients | null,
): JobSetup {
  const bal = cfg.balance;
  const convention = req.angle_convention ?? bal?.angle_convention ?? 'against_rotation';
  const sensorIds = cfg.sensors.map((x) => x.id);
  const sensors =
    req.sensors ?? cfg.sensors.filter((x) => x.direction !== 'axial').map((x) => x.id);
  const problems: string[] = [];
  sensors.forEach((id, i) => {
    if (!sensorIds.includes(id)) {
      problems.push(
        `sensors[${i}]: "${id}" is not a sensor of this machine (${sensorIds.join(', ')})`,
      );
    }
    if (sensors.indexOf(id) !== i) problems.push(`sensors[${i}]: "${id}" is listed twice`);
  });
  let coefficientsFrom: JobSetup['coefficients_from'] = null;
  let planesIn = req.planes;
  if (req.kind === 'trim') {
    if (!stored) {
      throw conflict(
        'no influence coefficients are stored for this fan',
        'do a job with trial runs first; its coefficients are kept when it is finished',
      );
    }
    if (stored.asset !== cfg.machine.id) {
      throw conflict(
        `the stored coefficients belong to asset "${stored.asset}"`,
        'a trim run needs coefficients measured on this fan',
      );
    }
    coefficientsFrom = {
      job_id: stored.job_id,
      saved_at: stored.saved_at,
      speed_rpm: stored.speed_rpm,
    };
    planesIn ??= stored.planes.map((p) => {
      const c = bal?.planes?.[p];
      if (!c) {
        problems.push(
          `planes: no radius for plane "${p}" of the stored coefficients; give planes ` +
            `[{name: "${p}", radius_mm: ...}] or set balance.planes.${p} in the config`,
        );
      }
      return {
        name: p,
        radius_mm: c?.radius_mm ?? 1,
        ...(c?.max_mass_g !== undefined ? { max_mass_g: c.max_mass_g } : {}),
        ...(c?.positions ? { positions: c.positions } : {}),
      };
    });
    const unknownPlanes = planesIn
      .filter((p) => !stored.planes.includes(p.name))
      .map((p) => p.name);
    if (unknownPlanes.length) {
      problems.push(
        `planes: ${unknownPlanes.join(', ')} not in the stored ` +
          `coefficients (planes ${stored.planes.join(', ')})`,
      );
    }
    const noCoeff = sensors.filter((id) => !stored.coefficients[id]);
    if (noCoeff.length) {
      problems.push(
        `sensors: no stored coefficients for ${noCoeff.join(', ')} (stored: ` +
          `${Object.keys(stored.coefficients).join(', ')})`,
      );
    }
  } else {
    if (!planesIn) {
      planesIn = Object.entries(bal?.planes ?? {})
        .slice(0, PLANES_NEEDED[req.kind])
        .map(([n, p]) => ({
          name: n,
          radius_mm: p.radius_mm,
          ...(p.max_mass_g !== undefined ? { max_mass_g: p.max_mass_g } : {}),
          ...(p.positions ? { positions: p.positions } : {}),
        }));
    }
    if (planesIn.length !== PLANES_NEEDED[req.kind]) {
      problems.push(
        `planes: a ${req.kind.replace('_', '-')} job needs ` +
          `${PLANES_NEEDED[req.kind]} plane(s), ${planesIn.length} ` +
          `given${req.planes ? '' : " (from the config's balance.planes)"}`,
      );
    }
  }
  const planes: PlaneSetup[] = (planesIn ?? []).map((p) => ({
    name: p.name,
    radius_mm: p.radius_mm,
    max_mass_g: p.max_mass_g ?? null,
    positions: p.positions
      ? { count: p.positions.count, first_deg: p.positions.first_deg ?? 0 }
      : null,
  }));
  if (new Set(planes.map((p) => p.name)).size !== planes.length)
    problems.push('planes: the two planes need different names');
  if (planes.length > 0 && sensors.length < planes.length) {
    problems.push(
      `sensors: ${planes.length} planes need at least ${planes.length} sensors, ` +
        `at different bearings (${sensors.length} given)`,
    );
  }
  const grade = req.grade !== undefined ? parseGrade(req.grade) : (bal?.grade_mm_s ?? null);
  if (problems.length) {
    throw new ApiError(
      400,
      'invalid_request',
      `${problems.length} problem(s) in the job setup: ${problems.join('; ')}`,
      'fix the fields named and start the job again',
      problems,
    );
  }
  return {
    kind: req.kind,
    angle_convention: convention,
    planes,
    sensors,
    rotor_mass_kg: req.rotor_mass_kg ?? bal?.rotor_mass_kg ?? null,
    bearings: req.bearings ?? bal?.bearings ?? 2,
    grade_mm_s: grade,
    speed_rpm: req.speed_rpm ?? null,
    notes: req.notes ?? null,
    coefficients_from: coefficientsFrom,
  };
}

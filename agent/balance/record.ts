/**
 * Between a solved job and the stored coefficients: the watcher's forecast reads coefficients in
 * mm/s peak per gram, so they are exported only from jobs whose readings are in mm/s (peak or
 * r.m.s.) and whose speed is known; a trim job can take stored coefficients back in its own unit.
 * Pure functions.
 */
import { UserError } from '../errors.js';
import type { StoredCoefficients } from './coefficients.js';
import type { BalanceJob, BalanceResult, CoefficientValue } from './job.js';

type VelocityUnit = 'pk' | 'rms';

/** "mm/s pk", "mm/s peak", "mm/s 0-pk" -> pk; "mm/s rms" -> rms; anything else -> null. */
export function velocityUnit(ampUnit: string | undefined | null): VelocityUnit | null {
  if (!ampUnit) return null;
  const u = ampUnit.trim().toLowerCase().replace(/\s+/g, ' ');
  if (/^mm\/s[ _-]?(pk|peak|0-pk|0-peak)$/.test(u)) return 'pk';
  if (/^mm\/s[ _-]?(rms|r\.m\.s\.)$/.test(u)) return 'rms';
  return null;
}

export function exportCoefficients(
  job: BalanceJob,
  result: BalanceResult,
  meta: { asset: string | null; jobId: string; savedAt: string },
): { coefficients: StoredCoefficients } | { reason: string } {
  if (!result.ok || result.method !== 'trial_runs') {
    return {
      reason: result.ok
        ? 'the job used given coefficients and measured none of its own'
        : 'the job was not solved',
    };
  }
  const unit = velocityUnit(job.amp_unit);
  if (!unit)
    return {
      reason:
        `readings are in "${job.amp_unit ?? 'an unstated unit'}"; the ` +
        `watcher needs mm/s (set amp_unit to "mm/s pk" or "mm/s rms")`,
    };
  if (result.speed_rpm === null)
    return {
      reason:
        'no run carries speed_rpm, and coefficients are ' +
        'only valid at the speed they were measured at',
    };
  if (!meta.asset)
    return { reason: 'the asset is unknown (give --config or --asset, or "asset" in the job)' };
  const k = unit === 'rms' ? Math.SQRT2 : 1;
  const coefficients: Record<
    string,
    Record<string, { amp_mm_s_pk_per_g: number; phase_deg: number }>
  > = {};
  for (const c of result.influence_coefficients) {
    (coefficients[c.sensor] ??= {})[c.plane] = {
      amp_mm_s_pk_per_g: c.amp_per_g * k,
      phase_deg: c.phase_deg,
    };
  }
  return {
    coefficients: {
      version: 1,
      asset: meta.asset,
      saved_at: meta.savedAt,
      job_id: meta.jobId,
      angle_convention: result.angle_convention,
      speed_rpm: result.speed_rpm,
      planes: [...result.planes],
      ...(job.radius_mm ? { radius_mm: { ...job.radius_mm } } : {}),
      coefficients,
    },
  };
}

/**
 * Stored coefficients as the job's `influence_coefficients`, in the job's amplitude unit. The
 * stored figures are the response to 1 g on the reference mark, so they hold whatever angle
 * convention the new job uses. Throws UserError when the job's sensors, planes or unit do not fit.
 */
export function coefficientsForJob(
  stored: StoredCoefficients,
  job: BalanceJob,
  source: string,
): Record<string, Record<string, CoefficientValue>> {
  const unit = job.amp_unit === undefined ? 'pk' : velocityUnit(job.amp_unit);
  if (!unit) {
    throw new UserError(
      source,
      `the stored coefficients are in mm/s peak per gram ` +
        `but the job's readings are in "${job.amp_unit}"`,
      'record the trim run in mm/s (amp_unit "mm/s pk" or "mm/s rms"), or do trial runs instead',
    );
  }
  const k = unit === 'rms' ? 1 / Math.SQRT2 : 1;
  const out: Record<string, Record<string, CoefficientValue>> = {};
  for (const sensor of Object.keys(job.runs[0]!.readings)) {
    const row = stored.coefficients[sensor];
    if (!row)
      throw new UserError(
        source,
        `no stored coefficients for sensor "${sensor}" (stored: ` +
          `${Object.keys(stored.coefficients).join(', ')})`,
        'read the trim run on the sensors of the job the coefficients came from',
      );
    for (const plane of job.planes) {
      const c = row[plane];
      if (!c)
        throw new UserError(
          source,
          `no stored coefficient for plane "${plane}" at sensor ` +
            `"${sensor}" (stored planes: ${stored.planes.join(', ')})`,
          'use the plane names of the job the coefficients came from',
        );
      (out[sensor] ??= {})[plane] = { amp_per_g: c.amp_mm_s_pk_per_g * k, phase_deg: c.phase_deg };
    }
  }
  return out;
}

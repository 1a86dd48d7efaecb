/**
 * The balancing workbench's records: one job at a time on this fan, run by an operator step by
 * step.
 *
 * A job is a sequence of runs. runs[0] is the rotor as found. Each later run is DECLARED first (the
 * weights removed and fitted since the previous run, with the safety cautions acknowledged), then
 * CAPTURED (its 1x vectors averaged at steady speed). Weights are kept relative to as found, with
 * an id each (T1, T2 ... trial, C1, C2 ... correction), the radius they sit at, and the job's angle
 * convention. The solver gets each weight as its equivalent mass at the plane's radius.
 *
 *  trial jobs: as found -> trial run(s) -> solve -> check run (corrections
 *  fitted) -> [trim -> check] -> finish
 *  trim jobs:   as found -> solve from the stored influence coefficients -> check run -> finish
 *
 * The saved record is agent/balance's BalanceJobRecord: `job` and `result` are the job exactly as
 * solved for the correction (as found plus trial runs, or as found plus the stored coefficients),
 * and `workbench` holds every run (check runs included) with its capture details and the action
 * log. Everything here is pure: records in, records out.
 */
import { conventionText, type AngleConvention } from '../conventions.js';
import type {
  BalanceJob,
  BalanceResult,
  CoefficientValue,
  Issue,
  JobRun,
  PlaneWeight,
} from '../job.js';
import { solveBalanceJob, trialMove, type TrialMove } from '../solve.js';
import type { BalanceJobRecord } from '../store.js';
import { permissibleUnbalanceGmm } from '../weights.js';
import type { CaptureResult } from './capture.js';
import type { JobKind } from './requests.js';

/**
 * Who did something: the name typed on the page and the token (holder name and role) it came with.
 */
export interface Actor {
  readonly name: string;
  readonly token: string;
  /**
   * The token's role on the live page (agent/live/auth.ts LiveRole), or a plant command over MQTT.
   */
  readonly role: 'viewer' | 'operator' | 'command';
}

export interface PlaneSetup {
  readonly name: string;
  readonly radius_mm: number;
  readonly max_mass_g: number | null;
  readonly positions: { readonly count: number; readonly first_deg: number } | null;
}

export interface JobSetup {
  readonly kind: JobKind;
  readonly angle_convention: AngleConvention;
  readonly planes: readonly PlaneSetup[];
  readonly sensors: readonly string[];
  readonly rotor_mass_kg: number | null;
  readonly bearings: number;
  readonly grade_mm_s: number | null;
  /** Speed the job is run at, r/min, when given (else the live speed is used for forces). */
  readonly speed_rpm: number | null;
  readonly notes: string | null;
  /** Trim jobs: the stored coefficients used. */
  readonly coefficients_from: {
    readonly job_id: string;
    readonly saved_at: string;
    readonly speed_rpm: number;
  } | null;
}

export interface FittedWeight {
  readonly id: string;
  readonly role: 'trial' | 'correction';
  readonly plane: string;
  readonly mass_g: number;
  /** In the job's angle convention, 0-360. */
  readonly angle_deg: number;
  readonly radius_mm: number;
}

export interface WeightChange {
  readonly action: 'remove' | 'fit';
  readonly weight: FittedWeight;
  /** Centrifugal force at the job speed, N (null when no speed is known). */
  readonly force_n: number | null;
}

export interface TrialCheckRow extends TrialMove {
  readonly sensor: string;
}

export interface ResidualReport {
  /** Per sensor: the check run against as found (mm/s pk). */
  readonly sensors: ReadonlyArray<{
    readonly sensor: string;
    readonly as_found_pk_mm_s: number;
    readonly amp_pk_mm_s: number;
    readonly phase_deg: number;
    readonly pct_of_as_found: number;
  }>;
  /** Residual unbalance per plane from the check run through the job's coefficients, g mm. */
  readonly unbalance_g_mm: Readonly<Record<string, number>> | null;
  readonly permissible_g_mm: number | null;
  readonly permissible_per_plane_g_mm: number | null;
  readonly within_grade: boolean | null;
  /** Weights to add on top of those fitted to remove the residual (a trim run). */
  readonly trim: readonly PlaneWeight[];
  readonly warnings: readonly Issue[];
}

export interface WorkbenchRun {
  readonly index: number;
  readonly label: string;
  readonly purpose: 'as_found' | 'trial' | 'check';
  /** Every weight on the rotor at this run, relative to as found. */
  readonly weights: readonly FittedWeight[];
  /** What changed since the previous run. */
  readonly changes: readonly WeightChange[];
  readonly declared_at: string;
  readonly declared_by: Actor;
  readonly cautions_acknowledged: boolean;
  capture: (CaptureResult & { readonly at: string; readonly by: Actor }) | null;
  /** Earlier captures of this run that were repeated. */
  earlier_captures: Array<CaptureResult & { readonly at: string; readonly by: Actor }>;
  capture_failures: Array<{ readonly at: string; readonly why: string }>;
  trial_check: readonly TrialCheckRow[] | null;
  residual: ResidualReport | null;
  discarded: { readonly at: string; readonly by: Actor; readonly reason: string } | null;
}

export interface Solution {
  readonly at: string;
  readonly by: Actor;
  readonly job: BalanceJob;
  readonly result: BalanceResult;
}

export interface LogEntry {
  readonly at: string;
  readonly by: Actor;
  readonly action: string;
  readonly detail: string;
}

export interface WorkbenchJob {
  readonly version: 1;
  readonly job_id: string;
  readonly asset: string;
  status: 'open' | 'finished' | 'abandoned';
  readonly created_at: string;
  readonly created_by: Actor;
  readonly setup: JobSetup;
  readonly runs: WorkbenchRun[];
  solution: Solution | null;
  coefficients: { readonly saved: boolean; readonly reason: string | null } | null;
  closed: { readonly at: string; readonly by: Actor; readonly note: string | null } | null;
  readonly log: LogEntry[];
  counters: { trial: number; correction: number };
}

/** The saved record: agent/balance's, plus the workbench's own state. */
export interface WorkbenchRecord extends BalanceJobRecord {
  readonly workbench: WorkbenchJob;
}

export interface ProposedChange {
  readonly title: string;
  readonly remove: 'all' | 'all_trials' | readonly string[];
  readonly add: ReadonlyArray<{
    readonly plane: string;
    readonly mass_g: number;
    readonly angle_deg: number;
    readonly radius_mm: number;
  }>;
  /**
   * The same weights split onto each plane's fixed positions (null when no plane has positions).
   */
  readonly add_split: ReadonlyArray<{
    readonly plane: string;
    readonly mass_g: number;
    readonly angle_deg: number;
    readonly radius_mm: number;
    readonly position: number;
  }> | null;
}

export type JobStep = 'capture' | 'trial' | 'solve' | 'correct' | 'check' | 'closed';

export const TRIALS_NEEDED: Record<JobKind, number> = {
  single_plane: 1,
  two_plane: 2,
  static_couple: 2,
  trim: 0,
};
export const PLANES_NEEDED: Record<JobKind, number> = {
  single_plane: 1,
  two_plane: 2,
  static_couple: 2,
  trim: 0,
};
export const AMP_UNIT = 'mm/s pk';

export function wrap360(a: number): number {
  const r = a % 360;
  return r < 0 ? r + 360 : r === 360 ? 0 : r;
}

export function fmt(x: number, d = 1): string {
  return x.toFixed(d);
}

export function runName(r: WorkbenchRun): string {
  return `run ${r.index} (${r.label})`;
}

/** The highest weight ids handed out so far (T for trial, C for correction), from the runs. */
export function countersOf(job: WorkbenchJob): { trial: number; correction: number } {
  const all = job.runs.flatMap((r) => r.weights);
  const max = (p: string) =>
    all.filter((w) => w.id.startsWith(p)).reduce((m, w) => Math.max(m, Number(w.id.slice(1))), 0);
  return { trial: max('T'), correction: max('C') };
}

export function newRun(
  job: WorkbenchJob,
  purpose: WorkbenchRun['purpose'],
  label: string,
  weights: FittedWeight[],
  changes: WeightChange[],
  at: string,
  by: Actor,
  ack: boolean,
): WorkbenchRun {
  return {
    index: job.runs.length,
    label,
    purpose,
    weights,
    changes,
    declared_at: at,
    declared_by: by,
    cautions_acknowledged: ack,
    capture: null,
    earlier_captures: [],
    capture_failures: [],
    trial_check: null,
    residual: null,
    discarded: null,
  };
}

/** Every weight on the rotor now (those of the last run), relative to as found. */
export function weightsOnRotor(job: WorkbenchJob): FittedWeight[] {
  return [...(job.runs[job.runs.length - 1]?.weights ?? [])];
}

/** The job as the solver sees it: as found plus the measured trial runs that are not discarded. */
export function balanceJobOf(job: WorkbenchJob): BalanceJob {
  const s = job.setup;
  const planeRadius = new Map(s.planes.map((p) => [p.name, p.radius_mm]));
  const runs: JobRun[] = job.runs
    .filter(
      (r) =>
        r.capture &&
        !r.discarded &&
        (r.purpose === 'as_found' || (r.purpose === 'trial' && s.kind !== 'trim')),
    )
    .map((r) => ({
      label: r.label,
      speed_rpm: r.capture!.speed_rpm,
      weights: r.weights.map((w) => ({
        plane: w.plane,
        mass_g: (w.mass_g * w.radius_mm) / planeRadius.get(w.plane)!,
        angle_deg: w.angle_deg,
      })),
      readings: Object.fromEntries(
        Object.entries(r.capture!.readings).map(([id, v]) => [
          id,
          { amp: v.amp_pk_mm_s, phase_deg: v.phase_deg },
        ]),
      ),
    }));
  const maxMass = Object.fromEntries(
    s.planes.filter((p) => p.max_mass_g !== null).map((p) => [p.name, p.max_mass_g!]),
  );
  return {
    job_id: job.job_id,
    asset: job.asset,
    angle_convention: s.angle_convention,
    planes: s.planes.map((p) => p.name),
    runs,
    amp_unit: AMP_UNIT,
    radius_mm: Object.fromEntries(planeRadius),
    ...(Object.keys(maxMass).length ? { max_mass_g: maxMass } : {}),
    ...(s.rotor_mass_kg !== null ? { rotor_mass_kg: s.rotor_mass_kg } : {}),
    ...(s.grade_mm_s !== null ? { grade_mm_s: s.grade_mm_s } : {}),
    ...(s.notes ? { notes: s.notes } : {}),
  };
}

/** A trial run against as found, per sensor: did the trial weight move the 1x enough? */
export function trialCheckOf(
  job: WorkbenchJob,
  asFound: CaptureResult,
  result: CaptureResult,
): TrialCheckRow[] {
  return job.setup.sensors.map((sensor) => {
    const a = asFound.readings[sensor]!;
    const b = result.readings[sensor]!;
    return {
      sensor,
      ...trialMove(
        { amp: a.amp_pk_mm_s, phase_deg: a.phase_deg },
        { amp: b.amp_pk_mm_s, phase_deg: b.phase_deg },
      ),
    };
  });
}

/**
 * The check run against as found, and through the job's coefficients as residual unbalance and trim
 * weights.
 */
export function residualOf(job: WorkbenchJob, run: WorkbenchRun): ResidualReport {
  const sol = job.solution!;
  const asFound = job.runs[0]!.capture!;
  const cap = run.capture!;
  const coeffs: Record<string, Record<string, CoefficientValue>> = {};
  for (const c of sol.result.influence_coefficients)
    (coeffs[c.sensor] ??= {})[c.plane] = { amp_per_g: c.amp_per_g, phase_deg: c.phase_deg };
  const trimJob: BalanceJob = {
    ...sol.job,
    runs: [
      {
        label: run.label,
        speed_rpm: cap.speed_rpm,
        weights: [],
        readings: Object.fromEntries(
          job.setup.sensors.map((s) => [
            s,
            { amp: cap.readings[s]!.amp_pk_mm_s, phase_deg: cap.readings[s]!.phase_deg },
          ]),
        ),
      },
    ],
    influence_coefficients: coeffs,
    ...(sol.result.speed_rpm !== null ? { coefficients_speed_rpm: sol.result.speed_rpm } : {}),
  };
  const r = solveBalanceJob(trimJob);
  const u = r.unbalance;
  const s = job.setup;
  const per =
    s.rotor_mass_kg !== null && s.grade_mm_s !== null
      ? permissibleUnbalanceGmm(s.grade_mm_s, s.rotor_mass_kg, cap.speed_rpm)
      : null;
  const perPlane = per === null ? null : per / s.planes.length;
  return {
    sensors: job.setup.sensors.map((sensor) => {
      const a = asFound.readings[sensor]!.amp_pk_mm_s;
      const b = cap.readings[sensor]!;
      return {
        sensor,
        as_found_pk_mm_s: a,
        amp_pk_mm_s: b.amp_pk_mm_s,
        phase_deg: b.phase_deg,
        pct_of_as_found: a > 0 ? (b.amp_pk_mm_s / a) * 100 : 0,
      };
    }),
    unbalance_g_mm: u ? u.as_found_g_mm : null,
    permissible_g_mm: per,
    permissible_per_plane_g_mm: perPlane,
    within_grade:
      u && perPlane !== null ? Object.values(u.as_found_g_mm).every((x) => x <= perPlane) : null,
    trim: r.ok ? r.corrections : [],
    warnings: [...r.warnings, ...r.problems],
  };
}

/**
 * The record saved for a job: agent/balance's BalanceJobRecord plus the workbench's state; the job
 * solved anew when it was not yet.
 */
export function recordOf(job: WorkbenchJob, savedAt: string): WorkbenchRecord {
  let solved = job.solution;
  if (!solved && job.runs[0]?.capture) {
    const bj = balanceJobOf(job);
    solved = { at: savedAt, by: job.created_by, job: bj, result: solveBalanceJob(bj) };
  }
  const bj: BalanceJob = solved?.job ?? {
    job_id: job.job_id,
    asset: job.asset,
    angle_convention: job.setup.angle_convention,
    planes: job.setup.planes.map((p) => p.name),
    runs: [],
    amp_unit: AMP_UNIT,
  };
  const result: BalanceResult = solved?.result ?? {
    ok: false,
    angle_convention: job.setup.angle_convention,
    convention: conventionText(job.setup.angle_convention),
    amp_unit: AMP_UNIT,
    planes: bj.planes,
    sensors: [...job.setup.sensors],
    method: null,
    corrections: [],
    corrections_trials_left_in: [],
    static_couple: null,
    influence_coefficients: [],
    as_found: [],
    predicted_residuals: [],
    trial_checks: [],
    condition_number: null,
    trial_condition_number: null,
    speed_rpm: null,
    unbalance: null,
    warnings: [],
    problems: [
      {
        code: 'no_runs',
        message: 'the as-found run is not measured yet',
        hint: 'capture the as-found run',
      },
    ],
  };
  return {
    version: 1,
    job_id: job.job_id,
    asset: job.asset,
    recorded_by: job.created_by.name,
    saved_at: savedAt,
    angle_convention: job.setup.angle_convention,
    job: bj,
    result,
    workbench: job,
  };
}

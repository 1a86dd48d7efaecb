/**
 * A balancing job as the technician records it (the `turnwise balance solve` input), and the result
 * the solver returns. Units are in the field names; reading amplitudes are in the job's one unit
 * (`amp_unit`, e.g. "mm/s pk").
 *
 * runs[0] is the rotor as found. Every later run lists the weights present on the rotor at that run
 * RELATIVE TO AS FOUND (a trial weight left in from an earlier run is listed again). Weight angles
 * follow `angle_convention` (see conventions.ts); phases are always lags.
 */
import type { Allocation, RotorGeometry } from './allocation.js';
import type { AngleConvention } from './conventions.js';

export interface Reading {
  readonly amp: number;
  readonly phase_deg: number;
}

export interface JobWeight {
  readonly plane: string;
  readonly mass_g: number;
  readonly angle_deg: number;
}

export interface JobRun {
  readonly label?: string;
  readonly speed_rpm?: number;
  readonly weights: readonly JobWeight[];
  /** 1x vector per sensor id. */
  readonly readings: Readonly<Record<string, Reading>>;
}

/** The 1x vector (job unit) a 1 g weight on the reference mark adds at a sensor. */
export interface CoefficientValue {
  readonly amp_per_g: number;
  readonly phase_deg: number;
}

export interface BalanceJob {
  readonly job_id?: string;
  readonly asset?: string;
  readonly angle_convention: AngleConvention;
  readonly planes: readonly string[];
  readonly runs: readonly JobRun[];
  /** Unit of every reading amplitude, e.g. "mm/s pk"; free text shown in tables. */
  readonly amp_unit?: string;
  /** Radius the weights of each plane sit at, mm. */
  readonly radius_mm?: Readonly<Record<string, number>>;
  /** Largest weight each plane can take, g. */
  readonly max_mass_g?: Readonly<Record<string, number>>;
  readonly rotor_mass_kg?: number;
  /** ISO 21940-11 balance quality grade G, mm/s. */
  readonly grade_mm_s?: number;
  /** Known influence coefficients [sensor][plane] for a trim run without trial runs. */
  readonly influence_coefficients?: Readonly<
    Record<string, Readonly<Record<string, CoefficientValue>>>
  >;
  /** Speed the given influence_coefficients were measured at, r/min (checked against the runs). */
  readonly coefficients_speed_rpm?: number;
  /** Bearing, centre-of-mass and plane positions for the ISO 21940-11 allocation to the planes. */
  readonly geometry?: RotorGeometry;
  readonly notes?: string;
}

/** A warning (the result stands, with a caveat) or a problem (no corrections are given). */
export interface Issue {
  readonly code: string;
  readonly message: string;
  /** What to do about it. */
  readonly hint: string;
}

export interface PlaneWeight {
  readonly plane: string;
  readonly mass_g: number;
  readonly angle_deg: number;
  /** mass * radius, g mm (when the plane's radius is known). */
  readonly unbalance_g_mm?: number;
  /** Centrifugal force at the job speed, N (when radius and speed are known). */
  readonly force_n?: number;
  /** True when the mass is above the plane's max_mass_g. */
  readonly over_max?: boolean;
}

export interface CoefficientOut {
  readonly sensor: string;
  readonly plane: string;
  /** Job amplitude unit per gram. */
  readonly amp_per_g: number;
  readonly phase_deg: number;
}

export interface SensorVector {
  readonly sensor: string;
  readonly amp: number;
  readonly phase_deg: number;
}

export interface TrialCheck {
  /** Index into runs. */
  readonly run: number;
  readonly label?: string;
  readonly sensor: string;
  /** (|V_run| - |V_as_found|) / |V_as_found|, %. */
  readonly amp_change_pct: number;
  /** Phase of the run minus phase as found, degrees in (-180, 180]. */
  readonly phase_change_deg: number;
  /** |V_run - V_as_found| / |V_as_found|, %. */
  readonly vector_change_pct: number;
  /** At least 30 % in amplitude or 30 degrees in phase (common practice). */
  readonly moved_enough: boolean;
}

export interface StaticCouple {
  /** The same weight in both planes at the same angle. */
  readonly static_pair: { readonly mass_g_each: number; readonly angle_deg: number };
  /**
   * Equal weights 180 degrees apart: at angle_deg in the first plane, angle_deg + 180 in the
   * second.
   */
  readonly couple_pair: {
    readonly mass_g_each: number;
    readonly angle_deg_first_plane: number;
    readonly angle_deg_second_plane: number;
  };
}

export interface UnbalanceReport {
  /** Estimated from the vibration through the influence coefficients, per plane, g mm. */
  readonly as_found_g_mm: Readonly<Record<string, number>>;
  /** Same for the state of the last run (the residual when the last run is a check run), g mm. */
  readonly last_run_g_mm: Readonly<Record<string, number>>;
  /**
   * ISO 21940-11 permissible residual unbalance of the whole rotor, g mm (when mass, grade, speed
   * known).
   */
  readonly permissible_g_mm: number | null;
  /** permissible_g_mm shared equally between the planes (the fallback; kept for comparison). */
  readonly permissible_per_plane_g_mm: number | null;
  /**
   * permissible_g_mm allocated to each plane (ISO 21940-11 from the geometry, else the equal
   * split).
   */
  readonly permissible_by_plane_g_mm: Readonly<Record<string, number>> | null;
  /** How the allocation was made, and its warnings. */
  readonly allocation: Allocation | null;
  /** Every plane's last-run unbalance within its allocated share. */
  readonly last_run_within_grade: boolean | null;
}

export interface BalanceResult {
  /** False when no corrections can be given honestly; `problems` says why. */
  readonly ok: boolean;
  readonly angle_convention: AngleConvention;
  /** The convention in words. */
  readonly convention: string;
  readonly amp_unit: string | null;
  readonly planes: readonly string[];
  readonly sensors: readonly string[];
  /** Where the influence coefficients came from. */
  readonly method: 'trial_runs' | 'given_coefficients' | null;
  /** Weights to add, relative to the rotor as found, with every trial weight removed. */
  readonly corrections: readonly PlaneWeight[];
  /** Weights to add when the weights of the last run are left on the rotor. */
  readonly corrections_trials_left_in: readonly PlaneWeight[];
  readonly static_couple: StaticCouple | null;
  readonly influence_coefficients: readonly CoefficientOut[];
  readonly as_found: readonly SensorVector[];
  /** 1x vectors expected after the corrections (non-zero when sensors outnumber planes). */
  readonly predicted_residuals: readonly SensorVector[];
  readonly trial_checks: readonly TrialCheck[];
  /** Condition number of the influence matrix (sensors x planes), columns scaled to unit length. */
  readonly condition_number: number | null;
  /** Condition number of the trial-weight matrix (runs x planes), columns scaled to unit length. */
  readonly trial_condition_number: number | null;
  /** Mean speed of the runs that carry one, r/min. */
  readonly speed_rpm: number | null;
  readonly unbalance: UnbalanceReport | null;
  readonly warnings: readonly Issue[];
  readonly problems: readonly Issue[];
}

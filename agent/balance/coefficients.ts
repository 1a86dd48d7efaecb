/**
 * Influence coefficients kept from a balancing job, the hand-off from the balancing workbench to
 * the watcher's balance forecast. Stored as JSON under `<state_dir>/balance/coefficients.json`.
 *
 * A coefficient says how the 1x velocity vector at a sensor moves per gram at a plane:
 * H = (V_trial - V_as_found) / T, as amplitude (mm/s peak per gram) and phase lag (degrees).
 * Weight angles follow `angle_convention`, measured from the reference mark.
 */
export interface StoredCoefficients {
  readonly version: 1;
  readonly asset: string;
  /** ISO 8601 UTC time the job was saved. */
  readonly saved_at: string;
  /** Id of the balancing job these came from. */
  readonly job_id: string;
  readonly angle_convention: 'against_rotation' | 'with_rotation';
  /** Mean speed of the runs the coefficients were measured at, r/min. */
  readonly speed_rpm: number;
  readonly planes: readonly string[];
  /**
   * Radius the job's weights sat at, per plane, mm (when the job gave it): a coefficient per gram
   * holds at that radius, so weights derived from it go there too.
   */
  readonly radius_mm?: Readonly<Record<string, number>>;
  /** coefficients[sensorId][plane] */
  readonly coefficients: Readonly<
    Record<
      string,
      Readonly<Record<string, { readonly amp_mm_s_pk_per_g: number; readonly phase_deg: number }>>
    >
  >;
}

import type { Config } from '../config/schema.js';
import type { SpeedPoint } from '../dsp/speed-points.js';
import { round } from '../report/units.js';
import { findSweeps } from './detect.js';
import { findResonances, type Resonance } from './resonance.js';

/**
 * From a speed trace of 1x points to run-ups and coast-downs with their resonances (pure): what
 * `turnwise sweep` prints and what the agent will record. Phase as everywhere in turnwise: a lag in
 * degrees from the tach rising edge to the positive peak of the 1x velocity component, as measured
 * (the sensor's mounting_angle_deg is reported beside it, not subtracted).
 */

export interface SweepChannel {
  readonly id: string;
  readonly bearing: string;
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  readonly mounting_angle_deg: number;
  /** In the order measured (descending speed for a coast-down). */
  readonly points: readonly {
    readonly rpm: number;
    readonly amp_pk_mm_s: number;
    readonly phase_deg: number;
  }[];
  readonly resonances: readonly Resonance[];
}

export interface Sweep {
  readonly direction: 'up' | 'down';
  readonly from_rpm: number;
  readonly to_rpm: number;
  /** Seconds from the start of the record (sample clock) to the sweep's first point. */
  readonly start_s: number;
  readonly duration_s: number;
  /** Mean rate of speed change, r/min per second (negative on a coast-down). */
  readonly rate_rpm_per_s: number;
  readonly points: number;
  /** Sample-clock end indices of the sweep's first and last points. */
  readonly first_index: number;
  readonly last_index: number;
  readonly channels: readonly SweepChannel[];
  readonly warnings: readonly string[];
}

export function sweepsFromPoints(
  points: readonly SpeedPoint[],
  cfg: Config,
  sampleRate: number,
  firstIndex = 0,
): Sweep[] {
  const s = cfg.sweep;
  const rpm = Float64Array.from(points, (p) => p.rpm);
  let ref = cfg.machine.rated_rpm;
  if (ref === undefined) ref = rpm.reduce((m, v) => Math.max(m, v), 0);
  if (!(ref > 0)) return [];
  const spans = findSweeps(rpm, {
    minChangeRpm: s.min_change_share * ref,
    reversalRpm: s.reversal_share * ref,
    steadyRpm: s.steady_share * ref,
  });
  return spans.map((span) => {
    const pts = points.slice(span.start, span.end + 1);
    const first = pts[0]!;
    const last = pts[pts.length - 1]!;
    const duration = (last.end_index - first.end_index) / sampleRate;
    const warnings: string[] = [];
    // Too fast, anywhere on the sweep: the speed moves more than max_point_change_pct of the
    // reference speed within one point. Measured against the reference speed, not the speed of the
    // moment: a steady coast-down takes longest over its slowest revolutions, yet moves no faster
    // in r/min there; where a resonance needs finer points, the half-power check below says so.
    let worst = 0;
    let worstAt = 0;
    for (let i = 1; i < pts.length; i++) {
      const change = Math.abs(pts[i]!.rpm - pts[i - 1]!.rpm) / ref;
      if (change > worst) {
        worst = change;
        worstAt = i;
      }
    }
    if (worst * 100 > s.max_point_change_pct) {
      const a = pts[worstAt - 1]!;
      const b = pts[worstAt]!;
      const rate = ((b.rpm - a.rpm) * sampleRate) / (b.end_index - a.end_index);
      warnings.push(
        `the speed changed ${Math.abs(b.rpm - a.rpm).toFixed(0)} r/min ` +
          `(${(worst * 100).toFixed(1)} % of ${ref.toFixed(0)} r/min) between two ` +
          `points near ${b.rpm.toFixed(0)} r/min (${rate.toFixed(0)} r/min per s): ` +
          `too fast for ${s.revolutions_per_point} revolution(s) per point, so the ` +
          `curve is smeared there; lower sweep.revolutions_per_point, or sweep more ` +
          `slowly (limit sweep.max_point_change_pct = ${s.max_point_change_pct} %)`,
      );
    }
    const gaps = pts.slice(1).filter((p) => p.after_gap).length;
    if (gaps > 0)
      warnings.push(`${gaps} gap(s) in the samples during this sweep: the curve has holes there`);
    const ascending = span.direction === 'up' ? pts : [...pts].reverse();
    const channels: SweepChannel[] = cfg.sensors.map((sensor, c) => {
      const res = findResonances(
        ascending.map((p) => p.rpm),
        ascending.map((p) => p.amp_pk_mm_s[c]!),
        ascending.map((p) => p.phase_deg[c]!),
        { minPhaseShiftDeg: s.min_phase_shift_deg, ratedRpm: cfg.machine.rated_rpm },
      );
      return {
        id: sensor.id,
        bearing: sensor.bearing,
        direction: sensor.direction,
        mounting_angle_deg: sensor.mounting_angle_deg,
        points: pts.map((p) => ({
          rpm: p.rpm,
          amp_pk_mm_s: p.amp_pk_mm_s[c]!,
          phase_deg: p.phase_deg[c]!,
        })),
        resonances: res,
      };
    });
    warnings.push(...thinResonances(channels, s.min_points_in_band, s.revolutions_per_point));
    return {
      direction: span.direction,
      from_rpm: first.rpm,
      to_rpm: last.rpm,
      start_s: (first.end_index - firstIndex) / sampleRate,
      duration_s: duration,
      rate_rpm_per_s: duration > 0 ? (last.rpm - first.rpm) / duration : 0,
      points: pts.length,
      first_index: first.end_index,
      last_index: last.end_index,
      channels,
      warnings,
    };
  });
}

/**
 * A resonance found on too few points: its peak and its half-power AF rest on the points inside
 * the half-power band, and with fewer than `minPoints` there the peak is likely missed or flattened
 * (the sweep passed it too fast for the revolutions averaged into each point). One warning per
 * resonance speed, naming the channels that show it.
 */
function thinResonances(
  channels: readonly SweepChannel[],
  minPoints: number,
  revsPerPoint: number,
): string[] {
  const thin: { rpm: number; lo: number; hi: number; inBand: number; ids: string[] }[] = [];
  for (const c of channels)
    for (const r of c.resonances) {
      const [lo, hi] = r.half_power_rpm;
      const inBand = c.points.filter((p) => p.rpm >= lo && p.rpm <= hi).length;
      if (inBand >= minPoints) continue;
      const same = thin.find((t) => Math.abs(t.rpm - r.rpm) <= Math.max(hi - lo, 1));
      if (same) {
        same.ids.push(c.id);
        same.inBand = Math.min(same.inBand, inBand);
      } else thin.push({ rpm: r.rpm, lo, hi, inBand, ids: [c.id] });
    }
  return thin.map(
    (t) =>
      `the resonance near ${t.rpm.toFixed(0)} r/min (${t.ids.join(', ')}) ` +
      `rests on ${t.inBand} point(s) within its half-power band ` +
      `${t.lo.toFixed(0)}-${t.hi.toFixed(0)} r/min, fewer than ${minPoints}: ` +
      `its peak speed, height and amplification factor are doubtful; sweep ` +
      `through it more slowly or lower sweep.revolutions_per_point (now ` +
      `${revsPerPoint}) (limit sweep.min_points_in_band = ${minPoints})`,
  );
}

/**
 * One sweep as `turnwise sweep --json` prints it (also the body of each sweep the agent stores).
 */
export function sweepRecordJson(s: Sweep): SweepRecordJson {
  return {
    direction: s.direction,
    from_rpm: round(s.from_rpm, 1),
    to_rpm: round(s.to_rpm, 1),
    start_s: round(s.start_s, 2),
    duration_s: round(s.duration_s, 2),
    rate_rpm_per_s: round(s.rate_rpm_per_s, 2),
    channels: s.channels.map((c) => ({
      id: c.id,
      bearing: c.bearing,
      direction: c.direction,
      mounting_angle_deg: c.mounting_angle_deg,
      points: c.points.map((p) => ({
        rpm: round(p.rpm, 1),
        amp_pk_mm_s: round(p.amp_pk_mm_s, 3),
        phase_deg: round(p.phase_deg, 1),
      })),
      resonances: c.resonances.map((r) => ({
        rpm: round(r.rpm, 1),
        amp_pk_mm_s: round(r.amp_pk_mm_s, 3),
        phase_deg: round(r.phase_deg, 1),
        half_power_rpm: r.half_power_rpm.map((x) => round(x, 1)),
        phase_shift_deg: round(r.phase_shift_deg, 1),
        amplification_factor: round(r.amplification_factor, 2),
        separation_margin_pct: round(r.separation_margin_pct, 1),
        required_margin_pct: round(r.required_margin_pct, 1),
        margin_ok: r.margin_ok,
      })),
    })),
    warnings: s.warnings,
  };
}

export type SweepRecordJson = {
  direction: 'up' | 'down';
  from_rpm: number | null;
  to_rpm: number | null;
  start_s: number | null;
  duration_s: number | null;
  rate_rpm_per_s: number | null;
  channels: {
    id: string;
    bearing: string;
    direction: string;
    mounting_angle_deg: number;
    points: { rpm: number | null; amp_pk_mm_s: number | null; phase_deg: number | null }[];
    resonances: {
      rpm: number | null;
      amp_pk_mm_s: number | null;
      phase_deg: number | null;
      half_power_rpm: (number | null)[];
      phase_shift_deg: number | null;
      amplification_factor: number | null;
      separation_margin_pct: number | null;
      required_margin_pct: number | null;
      margin_ok: boolean | null;
    }[];
  }[];
  warnings: readonly string[];
};

import type { WindowResult } from '../dsp/types.js';
import { UserError } from '../errors.js';
import {
  abs,
  add,
  angleDeg,
  circularSpread,
  diffDeg,
  fromPolar,
  sub,
  ZERO,
  type Complex,
} from './complex.js';
import type { HealthReport } from './health.js';
import type { WatcherSettings } from './settings.js';

/**
 * The commissioning baseline: each sensor's 1x vector (and overall) when the fan was known good.
 * Phases are as measured (mounting angle not subtracted): a baseline is only compared with the same
 * sensor.
 */
export interface BaselineChannel {
  readonly one_x_rms_mm_s: number;
  readonly one_x_phase_deg: number;
  readonly overall_rms_mm_s: number | null;
}

export interface Baseline {
  readonly version: 1;
  readonly asset: string;
  readonly source: 'learned' | 'config';
  /** ISO 8601 UTC time learning ended; null for a baseline from the config. */
  readonly learned_at: string | null;
  /** Windows averaged into it (0 for the config). */
  readonly windows: number;
  readonly speed_rpm: number | null;
  readonly channels: Readonly<Record<string, BaselineChannel>>;
}

/** The baseline written in the config (watcher.baseline), or null. */
export function baselineFromConfig(s: WatcherSettings): Baseline | null {
  const b = s.w.baseline;
  if (!b) return null;
  const channels: Record<string, BaselineChannel> = {};
  for (const [id, c] of Object.entries(b.channels)) {
    channels[id] = {
      one_x_rms_mm_s: c.one_x_rms_mm_s,
      one_x_phase_deg: c.one_x_phase_deg,
      overall_rms_mm_s: c.overall_rms_mm_s ?? null,
    };
  }
  return {
    version: 1,
    asset: s.asset,
    source: 'config',
    learned_at: null,
    windows: 0,
    speed_rpm: b.speed_rpm ?? null,
    channels,
  };
}

export interface VectorChange {
  /** |V - V_baseline|, mm/s r.m.s. */
  readonly delta_mm_s: number;
  /** |V| - |V_baseline|, mm/s r.m.s. */
  readonly amp_change_mm_s: number;
  /** Phase now minus phase at baseline, degrees (-180, 180]. */
  readonly phase_change_deg: number;
}

/** Change of a 1x vector from its baseline; catches a phase swing at constant amplitude. */
export function vectorChange(
  base: BaselineChannel,
  ampRmsMmS: number,
  phaseDeg: number,
): VectorChange {
  const d = sub(
    fromPolar(ampRmsMmS, phaseDeg),
    fromPolar(base.one_x_rms_mm_s, base.one_x_phase_deg),
  );
  return {
    delta_mm_s: abs(d),
    amp_change_mm_s: ampRmsMmS - base.one_x_rms_mm_s,
    phase_change_deg: diffDeg(phaseDeg, base.one_x_phase_deg),
  };
}

interface Acc {
  sum: Complex;
  phases: number[];
  overallSum: number;
  overallN: number;
}

/** Averages 1x vectors of healthy channels over windows while a baseline is being learned. */
export class BaselineLearner {
  private readonly acc = new Map<string, Acc>();
  private readonly speeds: number[] = [];
  private windows = 0;

  constructor(private readonly s: WatcherSettings) {}

  get windowCount(): number {
    return this.windows;
  }

  add(window: WindowResult, health: HealthReport): void {
    const h = new Map(health.channels.map((c) => [c.id, c]));
    let used = false;
    for (const c of window.channels) {
      const v = c.orders['1'];
      if (!v || !h.get(c.id)?.phase_ok) continue;
      let a = this.acc.get(c.id);
      if (!a) this.acc.set(c.id, (a = { sum: ZERO, phases: [], overallSum: 0, overallN: 0 }));
      a.sum = add(a.sum, fromPolar(v.amp_rms_mm_s, v.phase_deg));
      a.phases.push(v.phase_deg);
      if (c.overall_rms_mm_s !== null) {
        a.overallSum += c.overall_rms_mm_s;
        a.overallN += 1;
      }
      used = true;
    }
    if (used) {
      this.windows += 1;
      if (window.speed_rpm !== null) this.speeds.push(window.speed_rpm);
    }
  }

  /**
   * Ends learning. Channels with fewer than 3 windows or a wandering phase are left out and named.
   * Throws UserError when nothing usable was learned.
   */
  finish(learnedAtIso: string): { baseline: Baseline; left_out: string[] } {
    const where = 'baseline learning';
    const minWindows = 3;
    if (this.windows < minWindows) {
      throw new UserError(
        where,
        `only ${this.windows} window(s) with a healthy 1x vector were seen`,
        `keep the fan at steady speed and load for at ` +
          `least ${minWindows} windows, then stop learning`,
      );
    }
    const meanSpeed = this.speeds.reduce((a, b) => a + b, 0) / Math.max(1, this.speeds.length);
    const span = this.speeds.length
      ? (Math.max(...this.speeds) - Math.min(...this.speeds)) / meanSpeed
      : 0;
    if (span > 0.05) {
      throw new UserError(
        where,
        `speed changed ${(span * 100).toFixed(1)} % while learning`,
        'learn the baseline at steady speed and load',
      );
    }
    const channels: Record<string, BaselineChannel> = {};
    const leftOut: string[] = [];
    const tol = this.s.w.unbalance.phase_stability_deg;
    for (const [id, a] of this.acc) {
      const spread = circularSpread(a.phases)!.maxDevDeg;
      if (a.phases.length < minWindows)
        leftOut.push(`${id}: only ${a.phases.length} window(s) with a healthy 1x vector`);
      else if (spread > tol)
        leftOut.push(
          `${id}: 1x phase wandered ${Math.round(spread)} deg (more than ${tol}) while learning`,
        );
      else {
        const mean = { re: a.sum.re / a.phases.length, im: a.sum.im / a.phases.length };
        channels[id] = {
          one_x_rms_mm_s: abs(mean),
          one_x_phase_deg: angleDeg(mean),
          overall_rms_mm_s: a.overallN ? a.overallSum / a.overallN : null,
        };
      }
    }
    if (Object.keys(channels).length === 0) {
      throw new UserError(
        where,
        `no sensor gave a steady 1x vector (${leftOut.join('; ')})`,
        'check the sensors and the tach, then learn again at steady speed and load',
      );
    }
    return {
      baseline: {
        version: 1,
        asset: this.s.asset,
        source: 'learned',
        learned_at: learnedAtIso,
        windows: this.windows,
        speed_rpm: this.speeds.length ? meanSpeed : null,
        channels,
      },
      left_out: leftOut,
    };
  }
}

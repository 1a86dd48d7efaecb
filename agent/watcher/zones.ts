import type { WindowResult } from '../dsp/types.js';
import type { Baseline } from './baseline.js';
import type { HealthReport } from './health.js';
import {
  baselineAlarmMmS,
  classifyZone,
  scaleBoundaries,
  worseZone,
  type Boundaries,
  type Zone,
} from './limits.js';
import type { WatcherSettings } from './settings.js';
import type { SpeedState } from './stores.js';

export interface SpeedReport {
  /** null when the speed or the rated speed is unknown. */
  readonly state: SpeedState | null;
  readonly speed_rpm: number | null;
  readonly range_rpm: { readonly min: number; readonly max: number } | null;
  readonly why: string;
  /** Set when the speed suggests that tach.pulses_per_rev is wrong. */
  readonly pulses_per_rev_hint: PulsesPerRevHint | null;
}

export interface PulsesPerRevHint {
  /** Measured over rated speed, k or 1/k. */
  readonly speed_ratio: number;
  readonly configured: number;
  /** The pulses_per_rev that would give the rated speed. */
  readonly fits: number;
  readonly why: string;
}

/** Largest factor k looked for: measured speed near rated x k or rated / k, k = 2..4. */
const PPR_MAX_FACTOR = 4;
/**
 * How close to rated x k or rated / k the speed must be (a fan's speed sits within a few % of
 * rated).
 */
const PPR_RATIO_TOLERANCE = 0.03;
/**
 * Largest speed spread over the window, (max - min) / mean, for the speed to count as steady (a
 * 180 s coast-down passes rated / 2 at about 2 % per 2 s window).
 */
const PPR_STEADY_SPREAD = 0.015;

/**
 * A steady speed close to rated x k or rated / k (k = 2..4, within 3 %) while machine.rated_rpm is
 * set: the tach delivers k times more (or fewer) pulses per turn than tach.pulses_per_rev says, so
 * every "revolution" is 1/k of a turn (or k turns) and the order vectors are of the wrong orders.
 * Reported only when a whole pulses_per_rev would fit. A fan that really runs at 1/k of rated (a
 * variable-speed drive) gets the same hint; the words say so.
 */
export function pulsesPerRevHint(
  s: WatcherSettings,
  window: WindowResult,
): PulsesPerRevHint | null {
  const rated = s.ratedRpm;
  const v = window.speed_rpm;
  if (rated === null || v === null || !(v > 0)) return null;
  const lo = window.speed_min_rpm ?? v;
  const hi = window.speed_max_rpm ?? v;
  // starting or coasting: passing rated / k means nothing
  if ((hi - lo) / v > PPR_STEADY_SPREAD) return null;
  const ppr = s.pulsesPerRev;
  const at = `${v.toFixed(0)} r/min`;
  for (let k = 2; k <= PPR_MAX_FACTOR; k++) {
    if (Math.abs(v / (rated * k) - 1) <= PPR_RATIO_TOLERANCE) {
      const fits = ppr * k;
      return {
        speed_ratio: k,
        configured: ppr,
        fits,
        why:
          `${at} is about ${k} x machine.rated_rpm (${rated}): ` +
          `tach.pulses_per_rev is probably wrong, the tach gives ${fits} pulses ` +
          `per turn, not ${ppr} (set tach.pulses_per_rev: ${fits}); until then ` +
          `the 1x, 2x, ... vectors are not the shaft's orders`,
      };
    }
    if (ppr % k === 0 && Math.abs((v * k) / rated - 1) <= PPR_RATIO_TOLERANCE) {
      const fits = ppr / k;
      return {
        speed_ratio: 1 / k,
        configured: ppr,
        fits,
        why:
          `${at} is about 1/${k} of machine.rated_rpm (${rated}): unless the fan really ` +
          `runs at 1/${k} of its rated speed, tach.pulses_per_rev is probably wrong, the ` +
          `tach gives ${fits} pulse(s) per turn, not ${ppr} (set tach.pulses_per_rev: ` +
          `${fits}); until then the 1x, 2x, ... vectors are not the shaft's orders`,
      };
    }
  }
  return null;
}

export function speedReport(s: WatcherSettings, window: WindowResult): SpeedReport {
  const rated = s.ratedRpm;
  const v = window.speed_rpm;
  if (rated === null)
    return {
      state: null,
      speed_rpm: v,
      range_rpm: null,
      why: 'machine.rated_rpm not set: speed range not checked',
      pulses_per_rev_hint: null,
    };
  const range = { min: s.w.min_speed_share * rated, max: s.w.max_speed_share * rated };
  if (v === null)
    return {
      state: null,
      speed_rpm: null,
      range_rpm: range,
      why: 'no speed in this window',
      pulses_per_rev_hint: null,
    };
  const at = `${v.toFixed(0)} r/min`;
  const hint = pulsesPerRevHint(s, window);
  if (v < range.min)
    return {
      state: 'low',
      speed_rpm: v,
      range_rpm: range,
      why:
        `${at} is below ${range.min.toFixed(0)} r/min ` +
        `(${Math.round(s.w.min_speed_share * 100)} % of rated): starting or coasting down`,
      pulses_per_rev_hint: hint,
    };
  if (v > range.max)
    return {
      state: 'high',
      speed_rpm: v,
      range_rpm: range,
      why:
        `${at} is above ${range.max.toFixed(0)} r/min ` +
        `(${Math.round(s.w.max_speed_share * 100)} % of rated)`,
      pulses_per_rev_hint: hint,
    };
  return {
    state: 'in_range',
    speed_rpm: v,
    range_rpm: range,
    why: `${at}, within ${range.min.toFixed(0)}-${range.max.toFixed(0)} r/min`,
    pulses_per_rev_hint: hint,
  };
}

export interface ChannelZone {
  readonly status: 'ok' | 'not_ok';
  readonly problems: readonly string[];
  readonly overall_rms_mm_s: number | null;
  /** Zone of this window's overall; null when the sensor is not OK or there is no overall. */
  readonly zone: Zone | null;
  /**
   * Alarm level in force, mm/s r.m.s. (ISO 20816-3: baseline + 0.25 x B/C, at most 1.25 x B/C; B/C
   * without baseline).
   */
  readonly alarm_mm_s: number;
  readonly over_alarm: boolean;
}

export interface ZoneReport {
  /** Worst zone among OK sensors; "unknown" when none could be judged. */
  readonly machine: Zone | 'unknown';
  readonly channels: Readonly<Record<string, ChannelZone>>;
  /** Boundaries in force for this window (raised by the start-up multiplier when it applies). */
  readonly limits: Boundaries & { readonly basis: string; readonly multiplier: number };
  /**
   * True below the minimum speed share with below_min_speed "inhibit": zones are shown but not
   * acted on.
   */
  readonly inhibited: boolean;
  readonly notes: readonly string[];
}

/** Zones of one window with no memory (no hysteresis, no on-delay). */
export function evaluateZones(
  s: WatcherSettings,
  window: WindowResult,
  health: HealthReport,
  baseline: Baseline | null,
  speed: SpeedReport,
): ZoneReport {
  const notes: string[] = [];
  const startup = speed.state === 'low';
  const multiplier = startup && s.w.below_min_speed === 'raise' ? s.w.startup_multiplier : 1;
  const inhibited = startup && s.w.below_min_speed === 'inhibit';
  if (inhibited) notes.push(`zones and alarms held: ${speed.why}`);
  if (multiplier !== 1) notes.push(`limits raised x${multiplier}: ${speed.why}`);
  const b = scaleBoundaries(s.limits, multiplier);
  const byId = new Map(window.channels.map((c) => [c.id, c]));
  const channels: Record<string, ChannelZone> = {};
  let machine: Zone | null = null;
  for (const h of health.channels) {
    const overall = byId.get(h.id)?.overall_rms_mm_s ?? null;
    const baseOverall = s.w.baseline_alarm
      ? (baseline?.channels[h.id]?.overall_rms_mm_s ?? null)
      : null;
    const alarm = baselineAlarmMmS(baseOverall, s.limits.bc_mm_s) * multiplier;
    const zone = h.ok && overall !== null ? classifyZone(overall, b) : null;
    if (h.ok && overall === null) notes.push(`${h.id}: no overall r.m.s. in this window`);
    if (zone) machine = machine ? worseZone(machine, zone) : zone;
    channels[h.id] = {
      status: h.ok ? 'ok' : 'not_ok',
      problems: h.problems,
      overall_rms_mm_s: overall,
      zone,
      alarm_mm_s: alarm,
      over_alarm: zone !== null && overall! > alarm,
    };
  }
  return {
    machine: machine ?? 'unknown',
    channels,
    limits: { ...b, basis: s.limits.basis, multiplier },
    inhibited,
    notes,
  };
}

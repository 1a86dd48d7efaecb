import type { WindowResult } from '../dsp/types.js';
import type { Baseline } from './baseline.js';
import type { HealthReport } from './health.js';
import { baselineAlarmMmS, classifyZone, scaleBoundaries, worseZone, type Boundaries, type Zone } from './limits.js';
import type { WatcherSettings } from './settings.js';
import type { SpeedState } from './stores.js';

export interface SpeedReport {
  /** null when the speed or the rated speed is unknown. */
  readonly state: SpeedState | null;
  readonly speed_rpm: number | null;
  readonly range_rpm: { readonly min: number; readonly max: number } | null;
  readonly why: string;
}

export function speedReport(s: WatcherSettings, window: WindowResult): SpeedReport {
  const rated = s.ratedRpm;
  const v = window.speed_rpm;
  if (rated === null) return { state: null, speed_rpm: v, range_rpm: null, why: 'machine.rated_rpm not set: speed range not checked' };
  const range = { min: s.w.min_speed_share * rated, max: s.w.max_speed_share * rated };
  if (v === null) return { state: null, speed_rpm: null, range_rpm: range, why: 'no speed in this window' };
  const at = `${v.toFixed(0)} r/min`;
  if (v < range.min) return { state: 'low', speed_rpm: v, range_rpm: range, why: `${at} is below ${range.min.toFixed(0)} r/min (${Math.round(s.w.min_speed_share * 100)} % of rated): starting or coasting down` };
  if (v > range.max) return { state: 'high', speed_rpm: v, range_rpm: range, why: `${at} is above ${range.max.toFixed(0)} r/min (${Math.round(s.w.max_speed_share * 100)} % of rated)` };
  return { state: 'in_range', speed_rpm: v, range_rpm: range, why: `${at}, within ${range.min.toFixed(0)}-${range.max.toFixed(0)} r/min` };
}

export interface ChannelZone {
  readonly status: 'ok' | 'not_ok';
  readonly problems: readonly string[];
  readonly overall_rms_mm_s: number | null;
  /** Zone of this window's overall; null when the sensor is not OK or there is no overall. */
  readonly zone: Zone | null;
  /** Alarm level in force, mm/s r.m.s. (ISO 20816-3: baseline + 0.25 x B/C, at most 1.25 x B/C; B/C without baseline). */
  readonly alarm_mm_s: number;
  readonly over_alarm: boolean;
}

export interface ZoneReport {
  /** Worst zone among OK sensors; "unknown" when none could be judged. */
  readonly machine: Zone | 'unknown';
  readonly channels: Readonly<Record<string, ChannelZone>>;
  /** Boundaries in force for this window (raised by the start-up multiplier when it applies). */
  readonly limits: Boundaries & { readonly basis: string; readonly multiplier: number };
  /** True below the minimum speed share with below_min_speed "inhibit": zones are shown but not acted on. */
  readonly inhibited: boolean;
  readonly notes: readonly string[];
}

/** Zones of one window with no memory (no hysteresis, no on-delay). */
export function evaluateZones(s: WatcherSettings, window: WindowResult, health: HealthReport, baseline: Baseline | null, speed: SpeedReport): ZoneReport {
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
    const baseOverall = s.w.baseline_alarm ? (baseline?.channels[h.id]?.overall_rms_mm_s ?? null) : null;
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
  return { machine: machine ?? 'unknown', channels, limits: { ...b, basis: s.limits.basis, multiplier }, inhibited, notes };
}

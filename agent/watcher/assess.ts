import type { Config } from '../config/schema.js';
import type { WindowResult } from '../dsp/types.js';
import { baselineFromConfig, vectorChange, type Baseline, type VectorChange } from './baseline.js';
import { assessHealth, type HealthReport } from './health.js';
import { resolveWatcherSettings, type WatcherSettings } from './settings.js';
import { RULES } from './rules/index.js';
import type { SweepEvidence } from './rules/types.js';
import { diagnoseUnbalance, type RecentWindow, type UnbalanceAssessment } from './signature.js';
import { evaluateZones, speedReport, type SpeedReport, type ZoneReport } from './zones.js';

export interface ChannelVectorChange extends VectorChange {
  /** True when delta_mm_s reaches the configured vector-change size. */
  readonly significant: boolean;
}

/** Everything the watcher can say about one window without memory of earlier states. */
export interface WindowAssessment {
  readonly zone: ZoneReport;
  readonly unbalance: UnbalanceAssessment;
  readonly sensors: HealthReport['channels'];
  readonly tach: HealthReport['tach'];
  readonly speed: SpeedReport;
  /** Per sensor, change of the 1x vector from baseline; null without a baseline. */
  readonly vector_change: Readonly<Record<string, ChannelVectorChange>> | null;
  /** Reported size of a vector change, mm/s r.m.s. */
  readonly vector_change_limit_mm_s: number;
}

export function vectorChanges(
  s: WatcherSettings,
  window: WindowResult,
  health: HealthReport,
  baseline: Baseline | null,
): Record<string, ChannelVectorChange> | null {
  if (!baseline) return null;
  const ok = new Set(health.channels.filter((c) => c.phase_ok).map((c) => c.id));
  const out: Record<string, ChannelVectorChange> = {};
  for (const c of window.channels) {
    const b = baseline.channels[c.id];
    const v = c.orders['1'];
    if (!b || !v || !ok.has(c.id)) continue;
    const ch = vectorChange(b, v.amp_rms_mm_s, v.phase_deg);
    out[c.id] = { ...ch, significant: ch.delta_mm_s >= s.vectorChangeMmS };
  }
  return out;
}

/** The same as assessWindow, with settings resolved and health known (the live watcher's path). */
export function assessWith(
  s: WatcherSettings,
  window: WindowResult,
  health: HealthReport,
  baseline: Baseline | null,
  recent: readonly RecentWindow[],
  sweep: SweepEvidence | null = null,
): WindowAssessment {
  const speed = speedReport(s, window);
  const zone = evaluateZones(s, window, health, baseline, speed);
  const vectorChange = vectorChanges(s, window, health, baseline);
  return {
    zone,
    unbalance: diagnoseUnbalance(s, window, health, recent, RULES, {
      zone,
      vectorChange,
      baseline,
      sweep,
    }),
    sensors: health.channels,
    tach: health.tach,
    speed,
    vector_change: vectorChange,
    vector_change_limit_mm_s: s.vectorChangeMmS,
  };
}

/**
 * Severity zones, sensor health and unbalance signature of one DSP window (for `turnwise analyze`).
 * Pure: no files, no clock. `baseline` defaults to the one in the config (watcher.baseline); pass
 * the stored one (FileBaselineStore) to get vector changes and the baseline alarm. `recent` are
 * earlier windows of the same run, oldest first, for the 1x phase-stability rule.
 * Throws UserError when the watcher section names sensors or bearings that do not exist.
 */
export function assessWindow(
  cfg: Config,
  window: WindowResult,
  opts: { baseline?: Baseline | null; recent?: readonly WindowResult[] } = {},
): WindowAssessment {
  const s = resolveWatcherSettings(cfg);
  const recent = (opts.recent ?? []).map((w) => ({ window: w, health: assessHealth(w, s) }));
  const baseline = opts.baseline === undefined ? baselineFromConfig(s) : opts.baseline;
  return assessWith(s, window, assessHealth(window, s), baseline, recent);
}

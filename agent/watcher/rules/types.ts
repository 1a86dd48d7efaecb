import type { ChannelResult, WindowResult } from '../../dsp/types.js';
import { normDeg, sepDeg } from '../complex.js';
import type { Baseline } from '../baseline.js';
import type { HealthReport } from '../health.js';
import type { ZoneReport } from '../zones.js';
import type { WatcherSettings } from '../settings.js';

/**
 * What every watcher rule sees and returns. A rule is one declaration in one file under
 * agent/watcher/rules/: it reads the window (and the recent windows), says what it found
 * (evidence), what it could not check (limits, with a weight in `missing`), which other 1x causes
 * the findings point to, and the facts the verdict is built from. The composer
 * (agent/watcher/signature.ts) runs them in the order of RULES (rules/index.ts) and builds the
 * verdict from their facts.
 */

export type UnbalanceKind = 'static' | 'couple' | 'dynamic' | 'overhung' | 'none';
export type OneXCause =
  | 'misalignment'
  | 'bent_shaft'
  | 'eccentricity'
  | 'looseness'
  | 'resonance'
  | 'unstable_phase'
  | 'weak_support';
export type Relation = 'in_phase' | 'opposed' | 'between';

export interface PhasePair {
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  /** Unsigned phase separation after mounting angles are subtracted, degrees 0-180. */
  readonly phase_diff_deg: number;
  readonly relation: Relation;
}

export interface RecentWindow {
  readonly window: WindowResult;
  readonly health: HealthReport;
}

export interface Reading {
  readonly id: string;
  readonly bearing: string;
  readonly direction: ChannelResult['direction'];
  /** 1x r.m.s., mm/s. */
  readonly amp: number;
  /** 1x phase lag with the mounting angle subtracted, degrees. */
  readonly phase: number;
  readonly share: number | null;
  readonly c: ChannelResult;
}

export interface BearingMeasures {
  hv_amp_ratio: number | null;
  hv_phase_diff_deg: number | null;
  axial_over_radial: number | null;
}

/** The numbers behind the verdict (UnbalanceAssessment.measures); each rule fills its own. */
export interface UnbalanceMeasures {
  /** Largest 1x r.m.s. on a healthy radial sensor, mm/s; null when none. */
  max_radial_one_x_rms_mm_s: number | null;
  /** Median 1x share of the overall over the sensors that carry most of the 1x (0-1). */
  one_x_share: number | null;
  /** Largest 2x/1x amplitude ratio among sensors with a significant 1x. */
  two_x_over_one_x: number | null;
  bearings: Record<string, BearingMeasures>;
  /** Bearing-to-bearing comparisons per direction for the rotor's two bearings. */
  bearing_pair: {
    readonly bearings: readonly [string, string];
    readonly directions: readonly PhasePair[];
  } | null;
  /**
   * Largest 1x phase deviation from its mean over the recent windows, degrees; null when not
   * judged.
   */
  phase_spread_deg: number | null;
  /**
   * Median 1x phase jump from one window to the next (worst sensor), degrees; null when not judged.
   */
  phase_step_deg: number | null;
  stability_windows: number;
}

/** Facts a rule states for the verdict and for the rules after it. */
export interface RuleFacts {
  /** No verdict is possible or needed: the remaining rules are not run (kind "none"). */
  stop?: boolean;
  /** 1x does not dominate: not mainly unbalance. */
  not_one_x?: boolean;
  /** 2x at or above watcher.unbalance.two_x_ratio_max. */
  two_x_high?: boolean;
  /** Bearing-to-bearing phase pattern in the radial directions. */
  pair_kind?: 'static' | 'couple' | 'dynamic';
  /** High axial 1x with both axial readings in phase. */
  overhung_pattern?: boolean;
  /** Held to "low" whatever the rest says (e.g. a suspect tach.pulses_per_rev). */
  confidence_low?: boolean;
  /**
   * Nothing is significant (zone A, no baseline change): no finding, the pattern is information.
   */
  not_significant?: boolean;
}

/**
 * The resonances of the last recorded run-up or coast-down (agent/sweep), as evidence for the 1x
 * rules.
 */
export interface SweepEvidence {
  readonly sweep_id: string;
  readonly direction: 'up' | 'down';
  readonly resonances: readonly {
    readonly sensor: string;
    readonly rpm: number;
    readonly half_power_rpm: readonly [number, number];
  }[];
}

/**
 * What the significance rule compares against: this window's zones and the change from the
 * baseline.
 */
export interface SignificanceInputs {
  readonly zone: ZoneReport;
  readonly vectorChange: Readonly<
    Record<string, { readonly delta_mm_s: number; readonly significant: boolean }>
  > | null;
  readonly baseline: Baseline | null;
  /** The last recorded sweep's resonances; absent or null when no sweep is known. */
  readonly sweep?: SweepEvidence | null;
}

export interface RuleResult {
  /** The rule's name (its file name under agent/watcher/rules/). */
  readonly rule: string;
  /** Findings in plain words. */
  readonly evidence: readonly string[];
  /** What the data did not allow this rule to check. */
  readonly limits: readonly string[];
  /** Other 1x causes the findings point to, and why. */
  readonly points_to: readonly { readonly cause: OneXCause; readonly why: string }[];
  /**
   * Weight of checks the data did not allow (3 or more over all rules leaves the verdict "low").
   */
  readonly missing: number;
  readonly facts: RuleFacts;
}

/**
 * What a rule reads. `readings` are the phase-OK channels' 1x vectors with mounting angles
 * subtracted.
 */
export interface RuleContext {
  readonly s: WatcherSettings;
  readonly window: WindowResult;
  readonly health: HealthReport;
  /** Earlier windows, oldest first (not including this one). */
  readonly recent: readonly RecentWindow[];
  readonly readings: readonly Reading[];
  readonly radial: readonly Reading[];
  /** The radial reading with the largest 1x; null when there is none. */
  readonly maxRadial: Reading | null;
  /**
   * Radial readings with at least half the largest radial 1x: the sensors that carry most of it.
   */
  readonly main: readonly Reading[];
  readonly bearingNames: readonly string[];
  readonly measures: UnbalanceMeasures;
  /**
   * Zones and baseline change of this window; null when the caller has none (then nothing is
   * gated).
   */
  readonly inputs: SignificanceInputs | null;
  /** Facts stated by the rules run before this one. */
  readonly facts: Readonly<RuleFacts>;
  /** The healthy reading at a bearing in a direction. */
  pick(bearing: string, direction: string): Reading | undefined;
  /** Phase relation of the rotor's two bearings in one direction; null without readings at both. */
  pairRelation(direction: 'vertical' | 'horizontal' | 'axial'): PhasePair | null;
}

export interface WatcherRule {
  /** The rule's name: its file name, used in UnbalanceAssessment.rules[].rule. */
  readonly name: string;
  /** One line: what the rule checks and on what basis. */
  readonly summary: string;
  run(ctx: RuleContext): Omit<RuleResult, 'rule'>;
}

/** A rule result under construction. */
export class Finding {
  readonly evidence: string[] = [];
  readonly limits: string[] = [];
  readonly points_to: { cause: OneXCause; why: string }[] = [];
  missing = 0;
  facts: RuleFacts = {};
  point(causes: readonly OneXCause[], why: string): void {
    for (const cause of causes) this.points_to.push({ cause, why });
  }
  done(): Omit<RuleResult, 'rule'> {
    return {
      evidence: this.evidence,
      limits: this.limits,
      points_to: this.points_to,
      missing: this.missing,
      facts: this.facts,
    };
  }
}

export const pct = (x: number): string => `${Math.round(x * 100)} %`;
export const pct1 = (x: number): string => `${(x * 100).toFixed(1)} %`;
export const mm = (x: number): string => `${x.toFixed(2)} mm/s`;
export const deg = (x: number): string => `${Math.round(x)} deg`;

export function median(xs: readonly number[]): number | null {
  if (xs.length === 0) return null;
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

export function relationOf(diffDeg: number, tol: number): Relation {
  if (diffDeg <= tol) return 'in_phase';
  if (diffDeg >= 180 - tol) return 'opposed';
  return 'between';
}

/** The 1x vectors of the channels that may take part in phase rules. */
export function readingsOf(window: WindowResult, health: HealthReport): Reading[] {
  const ok = new Set(health.channels.filter((h) => h.phase_ok).map((h) => h.id));
  const out: Reading[] = [];
  for (const c of window.channels) {
    const v = c.orders['1'];
    if (!ok.has(c.id) || !v) continue;
    out.push({
      id: c.id,
      bearing: c.bearing,
      direction: c.direction,
      amp: v.amp_rms_mm_s,
      phase: normDeg(v.phase_deg - c.mounting_angle_deg),
      share: c.one_x_share,
      c,
    });
  }
  return out;
}

export const isRadial = (r: { direction: string }): boolean => r.direction !== 'axial';
export { sepDeg };

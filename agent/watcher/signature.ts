import type { WindowResult } from '../dsp/types.js';
import type { HealthReport } from './health.js';
import {
  isRadial,
  readingsOf,
  relationOf,
  RULES,
  sepDeg,
  type OneXCause,
  type PhasePair,
  type RecentWindow,
  type RuleContext,
  type RuleFacts,
  type RuleResult,
  type SignificanceInputs,
  type UnbalanceKind,
  type UnbalanceMeasures,
  type WatcherRule,
} from './rules/index.js';
import type { WatcherSettings } from './settings.js';

/**
 * Unbalance signature over one window (plus recent windows for phase stability), from the rules of
 * the trade, each one declaration under agent/watcher/rules/ (see RULES there). This file only runs
 * them in order and builds the verdict from their facts: not 1x-dominated or any other cause
 * pointed to -> "none"; an overhung rotor or the overhung pattern -> "overhung"; else the
 * bearing-to-bearing pattern (static, couple, dynamic); without one, "dynamic", the general case.
 */

export type { OneXCause, PhasePair, RecentWindow, RuleResult, UnbalanceKind, UnbalanceMeasures };
export type Confidence = 'high' | 'medium' | 'low';

export interface UnbalanceAssessment {
  readonly kind: UnbalanceKind;
  /** How much of the rule set the data allowed: "low" means the verdict rests on few sensors. */
  readonly confidence: Confidence;
  /** Findings in plain words (all rules, in rule order). */
  readonly evidence: readonly string[];
  /** With kind "none": the other 1x causes the findings point to, and why. */
  readonly points_to: readonly { readonly cause: OneXCause; readonly why: string }[];
  /** What the data could not show: sensors left out, rules not checked. */
  readonly limits: readonly string[];
  readonly measures: UnbalanceMeasures;
  /**
   * With kind "none" because nothing is significant (zone A, no baseline change): the pattern the
   * residual 1x shows (static, couple, ...), as information; null otherwise.
   */
  readonly residual_pattern: UnbalanceKind | null;
  /**
   * Each rule's own result, in the order run (rules not run because an earlier one stopped are
   * absent).
   */
  readonly rules: readonly RuleResult[];
}

function contextFor(
  s: WatcherSettings,
  window: WindowResult,
  health: HealthReport,
  recent: readonly RecentWindow[],
  facts: RuleFacts,
  measures: UnbalanceMeasures,
  inputs: SignificanceInputs | null,
): RuleContext {
  const readings = readingsOf(window, health);
  const radial = readings.filter(isRadial);
  const maxRadial = radial.length ? radial.reduce((a, r) => (r.amp > a.amp ? r : a)) : null;
  const pick = (bearing: string, direction: string) =>
    readings.find((r) => r.bearing === bearing && r.direction === direction);
  return {
    s,
    window,
    health,
    recent,
    readings,
    radial,
    maxRadial,
    main: maxRadial ? radial.filter((r) => r.amp >= 0.5 * maxRadial.amp) : [],
    bearingNames: [...new Set(readings.map((r) => r.bearing))],
    measures,
    inputs,
    facts,
    pick,
    pairRelation(direction): PhasePair | null {
      if (!s.bearings) return null;
      const r1 = pick(s.bearings[0], direction);
      const r2 = pick(s.bearings[1], direction);
      if (!r1 || !r2) return null;
      const d = sepDeg(r1.phase, r2.phase);
      return {
        direction,
        phase_diff_deg: d,
        relation: relationOf(d, s.w.unbalance.phase_tolerance_deg),
      };
    },
  };
}

export function diagnoseUnbalance(
  s: WatcherSettings,
  window: WindowResult,
  health: HealthReport,
  recent: readonly RecentWindow[] = [],
  rules: readonly WatcherRule[] = RULES,
  inputs: SignificanceInputs | null = null,
): UnbalanceAssessment {
  const measures: UnbalanceMeasures = {
    max_radial_one_x_rms_mm_s: null,
    one_x_share: null,
    two_x_over_one_x: null,
    bearings: {},
    bearing_pair: null,
    phase_spread_deg: null,
    phase_step_deg: null,
    stability_windows: 0,
  };
  const facts: RuleFacts = {};
  const ctx = contextFor(s, window, health, recent, facts, measures, inputs);
  const results: RuleResult[] = [];
  for (const rule of rules) {
    const r = { rule: rule.name, ...rule.run(ctx) };
    results.push(r);
    Object.assign(facts, r.facts);
    if (r.facts.stop) break;
  }
  const evidence = results.flatMap((r) => r.evidence);
  const limits = results.flatMap((r) => r.limits);
  const missing = results.reduce((a, r) => a + r.missing, 0);
  const pointsTo = new Map<OneXCause, string[]>();
  for (const r of results)
    for (const p of r.points_to) pointsTo.set(p.cause, [...(pointsTo.get(p.cause) ?? []), p.why]);

  let pattern: UnbalanceKind;
  if (facts.stop || facts.not_one_x || pointsTo.size > 0) pattern = 'none';
  else if (s.rotor === 'overhung' || facts.overhung_pattern) pattern = 'overhung';
  else if (facts.pair_kind) pattern = facts.pair_kind;
  else {
    limits.push(
      'reported as dynamic unbalance, the general case (two ' +
        'correction planes), because the bearings could not be compared',
    );
    pattern = 'dynamic';
  }
  // Below the significance level the pattern is kept as information only.
  const kind: UnbalanceKind = facts.not_significant ? 'none' : pattern;
  const confidence: Confidence =
    facts.confidence_low || ctx.radial.length <= 1 || missing >= 3
      ? 'low'
      : missing >= 1
        ? 'medium'
        : 'high';
  return {
    kind,
    confidence,
    evidence,
    points_to:
      kind === 'none'
        ? [...pointsTo].map(([cause, whys]) => ({ cause, why: whys.join('; ') }))
        : [],
    limits,
    measures,
    residual_pattern: facts.not_significant ? pattern : null,
    rules: results,
  };
}

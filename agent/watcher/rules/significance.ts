import { Finding, mm, type WatcherRule } from './types.js';

/**
 * Significance before a finding. Every rotor has residual unbalance: while the machine is in zone A
 * (ISO 20816-3: newly commissioned machines normally fall there) and nothing changed significantly
 * from the baseline, the 1x pattern is information, not a finding, and the verdict is "none".
 *
 * The level is watcher.unbalance.significance:
 * - basis zone_ab (default): the largest overall of an OK sensor above the A/B boundary in force;
 * - basis baseline_change: an overall at least 0.25 x (B/C) above that sensor's baseline overall
 *   (ISO 20816-3: a change of 25 % of the B/C value is significant even inside a zone); sensors
 *   without a baseline overall fall back to the A/B boundary;
 * - basis custom: the largest overall above overall_mm_s (the user's own level).
 * In every basis a 1x vector change from the baseline of at least the reported size
 * (watcher.vector_change_mm_s, default 0.25 x B/C) is significant too.
 */
export const significance: WatcherRule = {
  name: 'significance',
  summary:
    'no unbalance finding while every OK sensor is below the significance level (default ' +
    'the A/B boundary, ISO 20816-3) and no 1x vector changed significantly from the baseline',
  run({ s, health, window, inputs }) {
    const f = new Finding();
    if (!inputs) return f.done();
    const sig = s.w.unbalance.significance;
    const ab = inputs.zone.limits.ab_mm_s;
    const bc = inputs.zone.limits.bc_mm_s;
    const over: string[] = [];
    let judged = 0;
    let largest: { id: string; v: number; level: number } | null = null;
    for (const h of health.channels) {
      const v = inputs.zone.channels[h.id]?.overall_rms_mm_s;
      if (!h.ok || v == null) continue;
      judged++;
      const base = inputs.baseline?.channels[h.id]?.overall_rms_mm_s ?? null;
      const level =
        sig.basis === 'custom'
          ? sig.overall_mm_s
          : sig.basis === 'baseline_change' && base !== null
            ? base + 0.25 * bc
            : ab;
      if (!largest || v / level > largest.v / largest.level) largest = { id: h.id, v, level };
      if (v > level) over.push(`${h.id} ${mm(v)} above ${mm(level)}`);
    }
    const changed = Object.entries(inputs.vectorChange ?? {}).filter(([, c]) => c.significant);
    if (judged === 0) {
      f.limits.push(
        'no OK sensor with an overall level: the significance of the 1x was not judged',
      );
      return f.done();
    }
    const basis =
      sig.basis === 'custom'
        ? `watcher.unbalance.significance overall_mm_s ${sig.overall_mm_s} (set in the config)`
        : sig.basis === 'baseline_change'
          ? `baseline overall + 0.25 x B/C (ISO 20816-3 ` +
            `change criterion; A/B where no baseline overall)`
          : `the A/B boundary, ${mm(ab)} (${inputs.zone.limits.basis})`;
    if (over.length || changed.length) {
      const why = [
        ...(over.length ? [`overall ${over.join(', ')}`] : []),
        ...changed.map(
          ([id, c]) =>
            `${id} 1x changed ${mm(c.delta_mm_s)} from ` +
            `baseline (reported from ${mm(s.vectorChangeMmS)})`,
        ),
      ].join('; ');
      f.evidence.push(`significant: ${why} (level: ${basis})`);
      return f.done();
    }
    f.facts.not_significant = true;
    const top = largest!;
    f.evidence.push(
      `not significant: the largest overall is ${mm(top.v)} at ` +
        `${top.id}, within ${basis}, and ` +
        `${inputs.baseline ? `no 1x vector changed from the baseline by ${mm(s.vectorChangeMmS)} or more` : 'there is no baseline to compare with'}: ` +
        `every rotor has some residual unbalance, so the 1x pattern ` +
        `above is information, not a finding`,
    );
    void window;
    return f.done();
  },
};

import { Finding, type WatcherRule } from './types.js';

/**
 * Running speed inside the half-power band of a resonance found on the last recorded run-up or
 * coast-down (agent/sweep): 1x there is amplified by the support and swings with small speed
 * changes, so it is not read as unbalance alone (common practice: a resonance near running speed
 * makes 1x change sharply with speed, with a phase swing of about 90 deg through it).
 */
export const sweepResonance: WatcherRule = {
  name: 'sweep-resonance',
  summary:
    'running speed within the half-power band of a resonance on ' +
    'the last recorded run-up or coast-down (common practice)',
  run({ window, inputs }) {
    const f = new Finding();
    const sweep = inputs?.sweep ?? null;
    const rpm = window.speed_rpm;
    if (!sweep || rpm == null) return f.done();
    for (const r of sweep.resonances) {
      const [lo, hi] = r.half_power_rpm;
      if (rpm >= lo && rpm <= hi) {
        const why =
          `running at ${Math.round(rpm)} r/min, inside the half-power band ` +
          `${Math.round(lo)}-${Math.round(hi)} r/min of the resonance at ` +
          `${Math.round(r.rpm)} r/min on ${r.sensor} (sweep ${sweep.sweep_id})`;
        f.point(['resonance'], why);
        f.evidence.push(`${why}: 1x there is amplified by the support, not unbalance alone`);
      }
    }
    return f.done();
  },
};

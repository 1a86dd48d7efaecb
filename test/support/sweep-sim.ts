import { validateConfig } from '../../agent/config/load.js';
import { testScenario } from '../sim-fixtures.js';

/**
 * The simulated fan of the sweep tests (drivers/sim): horizontal supports with a resonance in the
 * speed range (natural_hz), vertical ones far above it; run-ups and coast-downs on the timeline.
 */
export const FS = 5120;

/** Speed of the peak of w^3 / |1 - r^2 + i 2 zeta r|, r/min (own computation). */
export function velocityPeakRpm(fnHz: number, zeta: number): number {
  let best = 0;
  let at = 0;
  for (let rpm = 100; rpm < 3000; rpm += 0.05) {
    const w = (rpm / 60) * 2 * Math.PI;
    const r = w / (2 * Math.PI * fnHz);
    const v = w ** 3 / Math.hypot(1 - r * r, 2 * zeta * r);
    if (v > best) {
      best = v;
      at = rpm;
    }
  }
  return at;
}

export function agentConfig(
  stateDir: string,
  mqtt?: { url: string; topic_prefix: string },
  sweep: Record<string, unknown> = {},
  extra: Record<string, unknown> = {},
) {
  const sensor = (id: string, channel: number, bearing: string, direction: string) => ({
    id,
    channel,
    bearing,
    direction,
    sensitivity_mv_per_g: 100,
  });
  return validateConfig({
    machine: { id: 'kessrow-id3a', group: 2, support: 'rigid', rated_rpm: 1500 },
    tach: { channel: 6, trigger_v: 2.5 },
    sensors: [
      sensor('DE-V', 0, 'DE', 'vertical'),
      sensor('DE-H', 1, 'DE', 'horizontal'),
      sensor('DE-A', 2, 'DE', 'axial'),
      sensor('NDE-V', 3, 'NDE', 'vertical'),
      sensor('NDE-H', 4, 'NDE', 'horizontal'),
      sensor('NDE-A', 5, 'NDE', 'axial'),
    ],
    state_dir: stateDir,
    watcher: { window_s: 2 },
    capture: { enabled: false },
    sweep,
    ...(mqtt ? { mqtt } : {}),
    ...extra,
  });
}

/**
 * Stand still, run up over 60 s to 1500 r/min, run 20 s, coast down over 60 s; then softer
 * horizontal supports and a second run-up.
 */
export function scenario(fnH: number, second?: { fnH: number }) {
  const base = testScenario({
    sample_rate_hz: FS,
    speed: { rpm: 0 },
    tach: { noise_rms_v: 0, rise_us: 600 },
  }) as { rotor: { support: Record<string, unknown> } };
  base.rotor.support = {
    ...base.rotor.support,
    vertical: { stiffness_mn_per_m: 35, natural_hz: 45 },
    horizontal: { stiffness_mn_per_m: 25, natural_hz: fnH },
  };
  const timeline: unknown[] = [
    { at: 1, start: { rpm: 1500, ramp_s: 60 } },
    { at: 81, stop: { coast_s: 60 } },
  ];
  if (second) {
    timeline.push({
      at: 150,
      support_change: { bearing: 'DE', direction: 'horizontal', natural_hz: second.fnH },
    });
    timeline.push({
      at: 150,
      support_change: { bearing: 'NDE', direction: 'horizontal', natural_hz: second.fnH },
    });
    timeline.push({ at: 151, start: { rpm: 1500, ramp_s: 60 } });
  }
  return { ...base, timeline };
}

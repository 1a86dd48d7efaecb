import { validateConfig } from '../../agent/config/load.js';
import type { Config } from '../../agent/config/schema.js';

/** A valid config for tests; `sensors` are [id, channel, bearing, direction] tuples. */
export function testConfig(
  sensors: ReadonlyArray<readonly [string, number, string, 'vertical' | 'horizontal' | 'axial']>,
  extra: {
    tachChannel?: number;
    blades?: number;
    ratedRpm?: number;
    ppr?: number;
    dsp?: Record<string, unknown>;
    machine?: Record<string, unknown>;
  } = {},
): Config {
  return validateConfig(
    {
      machine: {
        id: 'test-fan',
        group: 2,
        support: 'rigid',
        ...(extra.blades ? { blades: extra.blades } : {}),
        ...(extra.ratedRpm ? { rated_rpm: extra.ratedRpm } : {}),
        ...extra.machine,
      },
      tach: {
        channel: extra.tachChannel ?? sensors.length,
        trigger_v: 2.5,
        pulses_per_rev: extra.ppr ?? 1,
      },
      sensors: sensors.map(([id, channel, bearing, direction]) => ({
        id,
        channel,
        bearing,
        direction,
        sensitivity_mv_per_g: 100,
      })),
      ...(extra.dsp ? { dsp: extra.dsp } : {}),
    },
    'test config',
  );
}

import { describe, expect, it } from 'vitest';
import { validateConfig } from '../agent/config/load.js';
import type { SpeedPoint } from '../agent/dsp/speed-points.js';
import { sweepsFromPoints } from '../agent/sweep/sweeps.js';
import { steadyVelocity, trueResonance, type Mode } from './support/sweep-rig.js';

/**
 * The two "sweep too fast" warnings, on speed traces built from the steady-state response of a
 * single-degree-of-freedom support (test/support/sweep-rig.ts, own computation), point by point:
 * what each warning rests on is the spacing of the points, so the traces are spaced on purpose.
 *
 * - Speed change per point, against the reference speed (rated 1485 r/min): a coast-down at a
 *   steady rate moves as many r/min per second at its slow end as at its top, so it must not warn
 *   there (before, the change was measured against the speed of the moment and a plain 60 s
 *   coast-down warned near 300 r/min).
 * - Points within a resonance's half-power band: the half-power AF rests on them (API 684 practice,
 *   from memory); fewer than sweep.min_points_in_band (own choice: 5) gets a warning.
 */
const FS = 10240;
const RATED = 1485;
const cfg = validateConfig(
  {
    machine: { id: 'invented-fan', group: 2, support: 'flexible', rated_rpm: RATED },
    tach: { channel: 1, trigger_v: 2.5 },
    sensors: [
      { id: 'DE-H', channel: 0, bearing: 'DE', direction: 'horizontal', sensitivity_mv_per_g: 100 },
    ],
  },
  'test',
);

/** A coast-down from RATED to `to` r/min, one point every `stepRpm`, 4 revolutions a point. */
function coastDown(mode: Mode, to: number, stepRpm: number, rpmPerS: number): SpeedPoint[] {
  const pts: SpeedPoint[] = [];
  let index = 0;
  for (let rpm = RATED; rpm >= to; rpm -= stepRpm) {
    index += Math.round((FS * stepRpm) / rpmPerS);
    const v = steadyVelocity(mode, rpm);
    pts.push({
      end_index: index,
      rpm,
      amp_pk_mm_s: [v.ampPk],
      phase_deg: [v.phaseDeg],
      after_gap: false,
    });
  }
  return pts;
}

/**
 * A sharp support resonance near 903 r/min: 3 % of critical damping, half-power band about
 * 54 r/min.
 */
const SHARP: Mode = { fnHz: 15.05, zeta: 0.03, eccentricityMm: 0.026, heavyDeg: 30, noiseMmS2: 0 };

describe('sweep warnings: too fast for the averaging', () => {
  it('a steady coast-down with points 1 % of rated speed apart and 11 points across the resonance: no warning', () => {
    const band = trueResonance(SHARP, 300, RATED);
    const [s] = sweepsFromPoints(coastDown(SHARP, 300, 5, 20), cfg, FS);
    expect(s!.channels[0]!.resonances).toHaveLength(1);
    // The reference resonance is resolved: 54 r/min of band over 5 r/min steps.
    expect(Math.abs(s!.channels[0]!.resonances[0]!.rpm / band.rpm - 1)).toBeLessThan(0.01);
    expect(s!.warnings).toEqual([]);
  });

  it('points 2.7 % of rated speed apart (40 r/min): the rate warning, naming r/min, % of rated and r/min per s', () => {
    const [s] = sweepsFromPoints(coastDown(SHARP, 300, 40, 150), cfg, FS);
    const w = s!.warnings.find((x) => x.includes('too fast for 4 revolution(s) per point'));
    expect(w).toBeDefined();
    expect(w).toMatch(/changed 40 r\/min \(2\.7 % of 1485 r\/min\)/);
    expect(w).toMatch(/\(-150 r\/min per s\)/);
  });

  it('points 1.7 % of rated apart (25 r/min): no rate warning, but the sharp resonance rests on 2-3 points: warned', () => {
    const [s] = sweepsFromPoints(coastDown(SHARP, 300, 25, 40), cfg, FS);
    const res = s!.channels[0]!.resonances;
    expect(res).toHaveLength(1);
    const [lo, hi] = res[0]!.half_power_rpm;
    const inBand = s!.channels[0]!.points.filter((p) => p.rpm >= lo && p.rpm <= hi).length;
    expect(inBand).toBeLessThan(5);
    expect(s!.warnings.filter((x) => x.includes('too fast for'))).toEqual([]);
    expect(s!.warnings).toHaveLength(1);
    expect(s!.warnings[0]).toMatch(
      new RegExp(
        `^the resonance near 9\\d\\d r/min \\(DE-H\\) rests on ${inBand} point\\(s\\) ` +
          `within its half-power band \\d+-\\d+ r/min, fewer than 5: .*doubtful`,
      ),
    );
  });

  it('the same trace with sweep.min_points_in_band lowered to 2: no warning', () => {
    const lax = validateConfig({ ...cfg, sweep: { ...cfg.sweep, min_points_in_band: 2 } }, 'test');
    const [s] = sweepsFromPoints(coastDown(SHARP, 300, 25, 40), lax, FS);
    expect(s!.channels[0]!.resonances).toHaveLength(1);
    expect(s!.warnings).toEqual([]);
  });
});

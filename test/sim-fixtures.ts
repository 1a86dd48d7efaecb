/**
 * Shared helpers for the simulator tests: a small config and scenario built in code, and a plain
 * discrete Fourier transform written out here (independent of the project's DSP).
 */
import { validateConfig } from '../agent/config/load.js';
import type { Config } from '../agent/config/schema.js';
import { resolveScenario, validateScenario, type SimPlan } from '../drivers/sim/scenario.js';
import { FanSimulator, type SimulatorOptions } from '../drivers/sim/simulator.js';

export const FS = 25600;

export function testConfig(
  over: {
    rotor?: 'centre_hung' | 'overhung';
    bias?: boolean;
    fullScale?: number;
    mounting?: number;
  } = {},
): Config {
  const sensor = (id: string, channel: number, bearing: string, direction: string) => ({
    id,
    channel,
    bearing,
    direction,
    sensitivity_mv_per_g: 100,
    ...(over.bias ? { bias_v: { min: 8, max: 12 } } : {}),
    ...(over.fullScale ? { full_scale_v: over.fullScale } : {}),
    ...(over.mounting !== undefined && id === 'NDE-V' ? { mounting_angle_deg: over.mounting } : {}),
  });
  return validateConfig({
    machine: {
      id: 'test-fan',
      group: 2,
      support: 'rigid',
      rated_rpm: 1500,
      blades: 10,
      rotor: over.rotor ?? 'centre_hung',
    },
    tach: { channel: 6, trigger_v: 2.5 },
    sensors: [
      sensor('DE-V', 0, 'DE', 'vertical'),
      sensor('DE-H', 1, 'DE', 'horizontal'),
      sensor('DE-A', 2, 'DE', 'axial'),
      sensor('NDE-V', 3, 'NDE', 'vertical'),
      sensor('NDE-H', 4, 'NDE', 'horizontal'),
      sensor('NDE-A', 5, 'NDE', 'axial'),
    ],
  });
}

/** A scenario as plain data; `over` replaces top-level sections. */
export function testScenario(over: Record<string, unknown> = {}): Record<string, unknown> {
  return {
    scenario: 'test fan',
    seed: 7,
    sample_rate_hz: FS,
    rotor: {
      mass_kg: 850,
      bearings: [
        { name: 'DE', position_mm: 0 },
        { name: 'NDE', position_mm: 2400 },
      ],
      planes: [
        { name: 'P1', position_mm: 1000 },
        { name: 'P2', position_mm: 1400 },
      ],
      support: {
        vertical: { stiffness_mn_per_m: 35 },
        horizontal: { stiffness_mn_per_m: 25 },
        axial: { stiffness_mn_per_m: 60 },
        damping_ratio: 0.06,
      },
      unbalance: [{ plane: 'P1', mass_g: 40, radius_mm: 760, angle_deg: 30 }],
    },
    speed: { rpm: 1500 },
    signal: { noise_rms_g: 0 },
    tach: { noise_rms_v: 0 },
    ...over,
  };
}

export function plan(
  scenario: Record<string, unknown> = testScenario(),
  cfg: Config = testConfig(),
): SimPlan {
  return resolveScenario(
    validateScenario(scenario, 'test-scenario'),
    cfg,
    'test-scenario',
    'test-config',
  );
}

/** Renders `count` samples of every channel. */
export function render(
  p: SimPlan,
  count: number,
  opts: SimulatorOptions = {},
): { sim: FanSimulator; ch: Float32Array[]; edges: Float64Array } {
  const sim = new FanSimulator(p, opts);
  const ch = Array.from({ length: p.channelCount }, () => new Float32Array(count));
  const n = sim.render(ch, count);
  return { sim, ch, edges: Float64Array.from(sim.edges.subarray(0, n)) };
}

/**
 * Plain DFT at one frequency (cycles per sample), time measured from sample `t0` (may be
 * fractional): returns the one-sided complex amplitude X such that x[n] ~
 * Re{X e^{i 2 pi f (n - t0)}}, i.e. amplitude |X| and phase lag -arg X. Sums over samples [from,
 * from + count).
 */
export function dft(
  x: ArrayLike<number>,
  from: number,
  count: number,
  f: number,
  t0 = 0,
): { re: number; im: number; amp: number; lagDeg: number } {
  let re = 0;
  let im = 0;
  for (let n = from; n < from + count; n++) {
    const a = 2 * Math.PI * f * (n - t0);
    re += x[n]! * Math.cos(a);
    im -= x[n]! * Math.sin(a);
  }
  re *= 2 / count;
  im *= 2 / count;
  const lag = ((-Math.atan2(im, re) * 180) / Math.PI + 360) % 360;
  return { re, im, amp: Math.hypot(re, im), lagDeg: lag };
}

/**
 * Rising crossings of `level`, interpolated linearly between samples (fractional sample indices).
 */
export function risingEdges(x: ArrayLike<number>, level: number): number[] {
  const out: number[] = [];
  for (let n = 1; n < x.length; n++) {
    if (x[n - 1]! < level && x[n]! >= level)
      out.push(n - 1 + (level - x[n - 1]!) / (x[n]! - x[n - 1]!));
  }
  return out;
}

/** Signed difference of two angles a - b, degrees in (-180, 180]. */
export { deltaDeg as angleDiff } from '../agent/balance/complex.js';

export function mean(x: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < x.length; i++) s += x[i]!;
  return s / x.length;
}

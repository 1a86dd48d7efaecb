/**
 * Builds DSP windows (WindowResult) the way the DSP would deliver them from the invented demo fan
 * (Kessrow Board Mill ID-3A, config/example.yaml) in a given mechanical state. The 1x vectors
 * follow the rules of the trade for each state (common practice); overall, 1x
 * share and raw-signal statistics are derived from the vectors so the window is self-consistent.
 */
import { readFileSync } from 'node:fs';
import { parse } from 'yaml';
import { validateConfig } from '../../agent/config/load.js';
import type { Config } from '../../agent/config/schema.js';
import type {
  ChannelResult,
  ChannelStats,
  OrderVector,
  WindowResult,
} from '../../agent/dsp/types.js';

export type Direction = 'vertical' | 'horizontal' | 'axial';
export interface SensorSpec {
  readonly id: string;
  readonly channel: number;
  readonly bearing: string;
  readonly direction: Direction;
  readonly mounting_angle_deg: number;
}

/** The six sensors of the demo config (DE/NDE, V/H/A). */
export const DEMO_SENSORS: readonly SensorSpec[] = [
  { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', mounting_angle_deg: 0 },
  { id: 'DE-H', channel: 1, bearing: 'DE', direction: 'horizontal', mounting_angle_deg: 0 },
  { id: 'DE-A', channel: 2, bearing: 'DE', direction: 'axial', mounting_angle_deg: 0 },
  { id: 'NDE-V', channel: 3, bearing: 'NDE', direction: 'vertical', mounting_angle_deg: 0 },
  { id: 'NDE-H', channel: 4, bearing: 'NDE', direction: 'horizontal', mounting_angle_deg: 0 },
  { id: 'NDE-A', channel: 5, bearing: 'NDE', direction: 'axial', mounting_angle_deg: 0 },
];

/**
 * A 1x (or other order) vector: r.m.s. amplitude, mm/s, and phase lag as the sensor reads it,
 * degrees.
 */
export interface Vec {
  readonly amp: number;
  readonly phase: number;
}

export interface WindowSpec {
  /** 1x per sensor id; sensors left out of the map are absent from the window. */
  readonly oneX: Readonly<Record<string, Vec>>;
  /** Higher orders per sensor id, keyed by order number. Default: 2x at 10 % of 1x, 3x at 5 %. */
  readonly orders?: Readonly<Record<string, Readonly<Record<number, Vec>>>>;
  /** Non-synchronous broadband content per sensor, mm/s r.m.s. Default 0.3 x 1x. */
  readonly broadband?: Readonly<Record<string, number>>;
  readonly speed_rpm?: number;
  readonly start_index?: number;
  readonly seconds?: number;
  readonly stats?: Readonly<Record<string, Partial<ChannelStats>>>;
  readonly sensors?: readonly SensorSpec[];
  readonly tachEdges?: number;
  readonly missingPulses?: number;
}

export const SAMPLE_RATE_HZ = 5120;
const G = 9.80665;

/**
 * Raw-signal r.m.s. volts of a 100 mV/g accelerometer for velocity components (mm/s r.m.s.) at
 * frequencies (Hz).
 */
function acRmsV(parts: readonly { v: number; f: number }[]): number {
  let s = 0;
  for (const p of parts) s += ((((p.v / 1000) * 2 * Math.PI * p.f) / G) * 0.1) ** 2;
  return Math.sqrt(s);
}

export function synthWindow(spec: WindowSpec): WindowResult {
  const speed = spec.speed_rpm ?? 1485;
  const f1 = speed / 60;
  const seconds = spec.seconds ?? 10;
  const start = spec.start_index ?? 0;
  const samples = Math.round(seconds * SAMPLE_RATE_HZ);
  const revs = Math.floor(seconds * f1);
  const channels: ChannelResult[] = [];
  for (const s of spec.sensors ?? DEMO_SENSORS) {
    const v1 = spec.oneX[s.id];
    if (!v1) continue;
    const higher = spec.orders?.[s.id] ?? {
      2: { amp: 0.1 * v1.amp, phase: 2 * v1.phase + 20 },
      3: { amp: 0.05 * v1.amp, phase: 3 * v1.phase + 50 },
    };
    const orders: Record<string, OrderVector> = {};
    const all: [number, Vec][] = [
      [1, v1],
      ...Object.entries(higher).map(([k, v]) => [Number(k), v] as [number, Vec]),
    ];
    let sumSq = 0;
    for (const [k, v] of all) {
      orders[String(k)] = {
        order: k,
        freq_hz: k * f1,
        amp_rms_mm_s: v.amp,
        amp_pk_mm_s: v.amp * Math.SQRT2,
        phase_deg: ((v.phase % 360) + 360) % 360,
      };
      sumSq += v.amp ** 2;
    }
    const bb = spec.broadband?.[s.id] ?? 0.3 * v1.amp;
    const overall = Math.sqrt(sumSq + bb ** 2);
    const ac = acRmsV([...all.map(([k, v]) => ({ v: v.amp, f: k * f1 })), { v: bb, f: 120 }]);
    const stats: ChannelStats = {
      dc_v: 10.1,
      ac_rms_v: ac,
      min_v: 10.1 - 4 * ac,
      max_v: 10.1 + 4 * ac,
      clipped_samples: 0,
      samples,
      ...spec.stats?.[s.id],
    };
    channels.push({
      id: s.id,
      channel: s.channel,
      bearing: s.bearing,
      direction: s.direction,
      mounting_angle_deg: s.mounting_angle_deg,
      overall_rms_mm_s: overall,
      orders,
      one_x_share: v1.amp / overall,
      nonsync_peaks: [{ freq_hz: 2.37 * f1, order: 2.37, amp_rms_mm_s: 0.05 * v1.amp }],
      stats,
    });
  }
  return {
    start_index: start,
    end_index: start + samples,
    sample_rate_hz: SAMPLE_RATE_HZ,
    speed_rpm: spec.tachEdges === 0 ? null : speed,
    speed_min_rpm: spec.tachEdges === 0 ? null : speed * 0.999,
    speed_max_rpm: spec.tachEdges === 0 ? null : speed * 1.001,
    revolutions: spec.tachEdges === 0 ? 0 : revs,
    revolutions_rejected: spec.missingPulses ?? 0,
    band_hz: { low: 10, high: 1000 },
    spectrum_segments: Math.max(1, Math.floor(seconds) - 1),
    spectrum_resolution_hz: 1,
    gap_samples: 0,
    tach: {
      edges: spec.tachEdges ?? revs + 1,
      missing_pulses: spec.missingPulses ?? 0,
      double_triggers: 0,
      min_v: 0.1,
      max_v: 4.9,
    },
    channels,
    warnings: [],
  };
}

export type FanCase =
  'static' | 'couple' | 'dynamic' | 'overhung' | 'misalignment' | 'directional' | 'quiet';

/**
 * 1x vectors (and 2x where the case needs it) for a fan in a given state, by the trade's rules
 * (common practice): unbalance gives H about 90 deg from V with a modest ratio; static puts both
 * bearings in phase, couple 180 apart, dynamic in between; an overhung rotor adds high axial 1x in
 * phase at both bearings; misalignment gives high 2x and axial 1x 180 apart; directional 1x has H
 * and V in phase with a large ratio.
 */
export function fanCase(
  c: FanCase,
  opts: { amp?: number; phase?: number; start_index?: number; speed_rpm?: number } = {},
): WindowSpec {
  const a = opts.amp ?? 4;
  const p = opts.phase ?? 40;
  const radial = (deV: Vec, ndeV: Vec, hv = 0.8): Record<string, Vec> => ({
    'DE-V': deV,
    'DE-H': { amp: deV.amp * hv, phase: deV.phase + 90 },
    'NDE-V': ndeV,
    'NDE-H': { amp: ndeV.amp * hv, phase: ndeV.phase + 90 },
  });
  const lowAxial = {
    'DE-A': { amp: 0.12 * a, phase: p + 130 },
    'NDE-A': { amp: 0.1 * a, phase: p + 250 },
  };
  const base = { start_index: opts.start_index, speed_rpm: opts.speed_rpm };
  switch (c) {
    case 'static':
      return {
        ...base,
        oneX: { ...radial({ amp: a, phase: p }, { amp: 0.85 * a, phase: p + 12 }), ...lowAxial },
      };
    case 'couple':
      return {
        ...base,
        oneX: { ...radial({ amp: a, phase: p }, { amp: 0.9 * a, phase: p + 175 }), ...lowAxial },
      };
    case 'dynamic':
      return {
        ...base,
        oneX: { ...radial({ amp: a, phase: p }, { amp: 0.7 * a, phase: p + 95 }), ...lowAxial },
      };
    case 'overhung':
      return {
        ...base,
        oneX: {
          ...radial({ amp: a, phase: p }, { amp: 0.6 * a, phase: p + 10 }),
          'DE-A': { amp: 0.7 * a, phase: p + 20 },
          'NDE-A': { amp: 0.6 * a, phase: p + 28 },
        },
      };
    case 'misalignment': {
      const oneX = {
        ...radial({ amp: a, phase: p }, { amp: 0.8 * a, phase: p + 20 }),
        'DE-A': { amp: 0.8 * a, phase: p + 10 },
        'NDE-A': { amp: 0.7 * a, phase: p + 188 },
      };
      const orders: Record<string, Record<number, Vec>> = {};
      for (const [id, v] of Object.entries(oneX))
        orders[id] = {
          2: { amp: 0.9 * v.amp, phase: 2 * v.phase },
          3: { amp: 0.1 * v.amp, phase: 3 * v.phase },
        };
      return { ...base, oneX, orders };
    }
    case 'directional':
      return {
        ...base,
        oneX: {
          'DE-V': { amp: 0.9, phase: p },
          'DE-H': { amp: a, phase: p + 5 },
          'NDE-V': { amp: 0.7, phase: p + 15 },
          'NDE-H': { amp: 0.85 * a, phase: p + 190 },
          ...lowAxial,
        },
      };
    case 'quiet':
      return {
        ...base,
        oneX: {
          'DE-V': { amp: 0.35, phase: p },
          'DE-H': { amp: 0.3, phase: p + 90 },
          'DE-A': { amp: 0.1, phase: p + 40 },
          'NDE-V': { amp: 0.3, phase: p + 20 },
          'NDE-H': { amp: 0.25, phase: p + 110 },
          'NDE-A': { amp: 0.08, phase: p + 200 },
        },
        broadband: {
          'DE-V': 0.3,
          'DE-H': 0.3,
          'DE-A': 0.25,
          'NDE-V': 0.3,
          'NDE-H': 0.3,
          'NDE-A': 0.25,
        },
      };
  }
}

/**
 * The demo config (config/example.yaml, invented scenario) with healthy IEPE bias windows and
 * overrides.
 */
export function demoConfig(
  overrides: {
    machine?: Record<string, unknown>;
    tach?: Record<string, unknown>;
    watcher?: Record<string, unknown>;
    state_dir?: string;
    sensors?: (s: Record<string, unknown>) => Record<string, unknown> | null;
  } = {},
): Config {
  const raw = parse(readFileSync('config/example.yaml', 'utf8')) as Record<string, unknown> & {
    sensors: Record<string, unknown>[];
    machine: Record<string, unknown>;
    tach: Record<string, unknown>;
  };
  // Healthy IEPE bias 8-12 V DC (common practice).
  let sensors = raw.sensors.map((s) => ({ ...s, bias_v: { min: 8, max: 12 }, full_scale_v: 20 }));
  if (overrides.sensors)
    sensors = sensors.flatMap((s) => overrides.sensors!(s) ?? []) as typeof sensors;
  return validateConfig(
    {
      ...raw,
      sensors,
      machine: { ...raw.machine, ...overrides.machine },
      tach: { ...raw.tach, ...overrides.tach },
      ...(overrides.watcher ? { watcher: overrides.watcher } : {}),
      ...(overrides.state_dir ? { state_dir: overrides.state_dir } : {}),
    },
    'test config',
  );
}

import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { validateConfig } from '../agent/config/load.js';
import type { Config } from '../agent/config/schema.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import { SignalFactsStage } from '../agent/dsp/signal-facts.js';
import type { WindowResult } from '../agent/dsp/types.js';
import type { AgentEvent } from '../agent/events.js';
import { assessWindow } from '../agent/watcher/assess.js';
import { openWatcher } from '../agent/watcher/watcher.js';
import { FakeClock } from './support/fake-clock.js';
import {
  bearingDefectG,
  connectorV,
  convert,
  normal,
  oneXAccelG,
  tachV,
  type Plant,
} from './support/imperfect.js';

/**
 * Sensor faults read from the signal itself, through the real DSP (Analyzer) on signals from
 * test/support/imperfect.ts. The fan: 1485 r/min, six accelerometers of 100 mV/g on an AC-coupled
 * board of +/- 5 V, 24 bits, 25.6 kHz; no full_scale_v in the config unless a test sets it.
 */

const FS = 25600;
const WINDOW_S = 2;
const RAIL_V = 5;
const SENSORS = [
  { id: 'DE-V', bearing: 'DE', direction: 'vertical', vel: 4.0, phase: 40 },
  { id: 'DE-H', bearing: 'DE', direction: 'horizontal', vel: 3.2, phase: 130 },
  { id: 'DE-A', bearing: 'DE', direction: 'axial', vel: 0.5, phase: 170 },
  { id: 'NDE-V', bearing: 'NDE', direction: 'vertical', vel: 3.4, phase: 52 },
  { id: 'NDE-H', bearing: 'NDE', direction: 'horizontal', vel: 2.7, phase: 142 },
  { id: 'NDE-A', bearing: 'NDE', direction: 'axial', vel: 0.4, phase: 290 },
] as const;

function config(
  over: {
    sensors?: (s: Record<string, unknown>) => Record<string, unknown> | null;
    watcher?: Record<string, unknown>;
    state_dir?: string;
  } = {},
): Config {
  const sensors = SENSORS.map((s, i) => ({
    id: s.id,
    channel: i,
    bearing: s.bearing,
    direction: s.direction,
    sensitivity_mv_per_g: 100,
  })).flatMap((s) => (over.sensors ? (over.sensors(s) ?? []) : [s]));
  return validateConfig(
    {
      machine: {
        id: 'kessrow-id3a',
        name: 'Kessrow Board Mill ID fan 3A (invented)',
        group: 2,
        support: 'rigid',
        rated_rpm: 1485,
        blades: 10,
        rotor: 'centre_hung',
      },
      tach: { channel: 6, pulses_per_rev: 1, trigger_v: 2.5 },
      sensors,
      watcher: { window_s: WINDOW_S, ...over.watcher },
      ...(over.state_dir ? { state_dir: over.state_dir } : {}),
    },
    'test config',
  );
}

type Extra = Partial<
  Record<
    string,
    {
      g?: (p: Plant) => Float64Array;
      v?: (p: Plant) => Float64Array;
      scale?: (t: number) => number;
      only?: (t: number) => boolean;
    }
  >
>;

/**
 * Volts of the six sensors and the tach for `seconds`, the healthy fan plus the extras per sensor.
 */
function record(
  seconds: number,
  extra: Extra = {},
  opts: { bits?: number; railV?: number; seed?: number } = {},
): Float32Array[] {
  const p: Plant = { sampleRate: FS, seconds, rpm: 1485, channels: 7 };
  const n = Math.round(seconds * FS);
  const out: Float32Array[] = [];
  SENSORS.forEach((s, ci) => {
    const noise = normal((opts.seed ?? 1) * 100 + ci);
    const e = extra[s.id];
    const addG = e?.g?.(p);
    const addV = e?.v?.(p);
    const v = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const t = i / FS;
      // 1x and a 2x of 10 %, plus white acceleration noise of 0.004 g r.m.s.
      let g =
        oneXAccelG(p, s.vel, s.phase, t) +
        oneXAccelG({ ...p, rpm: 2 * p.rpm }, 0.1 * s.vel, 2 * s.phase, t) +
        0.004 * noise();
      if (addG) g += addG[i]!;
      if (e?.scale) g *= e.scale(t);
      v[i] = (e?.only && !e.only(t) ? 0 : g * 0.1) + (addV ? addV[i]! : 0);
    }
    out.push(convert(v, opts.railV ?? RAIL_V, opts.bits ?? 24));
  });
  const tach = new Float64Array(n);
  for (let i = 0; i < n; i++) tach[i] = tachV(p, i / FS);
  out.push(convert(tach, 10, 16));
  return out;
}

/** Runs the channels through the Analyzer in 2 s windows (blocks of 2560 samples). */
function windows(cfg: Config, channels: Float32Array[]): WindowResult[] {
  const block = 2560;
  const an = new Analyzer({
    config: cfg,
    sampleRate: FS,
    channelCount: channels.length,
    maxBlock: block,
  });
  const per = WINDOW_S * FS;
  const out: WindowResult[] = [];
  for (let i = 0; i < channels[0]!.length; i += block) {
    an.push({
      kind: 'samples',
      startIndex: i,
      channels: channels.map((c) => c.subarray(i, i + block)),
    });
    if ((i + block) % per === 0) out.push(an.takeWindow());
  }
  return out;
}

const ch = (w: WindowResult, id: string) => w.channels.find((c) => c.id === id)!;

// BPFO of an outer-race defect, n = 9 rollers, d/D = 0.25, contact angle 0 (typical proportions,
// from memory): (9 / 2) x 24.75 Hz x (1 - 0.25) = 83.5 Hz (textbook bearing kinematics).
const BPFO_HZ = (9 / 2) * (1485 / 60) * (1 - 0.25);
const bearing =
  (impactG: number, bpfoHz = BPFO_HZ, seed = 7) =>
  (p: Plant) =>
    bearingDefectG(p, {
      bpfoHz,
      resonanceHz: 3000,
      damping: 0.04,
      impactG,
      modulation: 0.5,
      slip: 0.015,
      seed,
    });
// The connector of the task: openings about 40 a second, jumps of 6-9 V into the +/- 5 V rail,
// 0.1-0.6 ms open.
const connector =
  (seed = 3, perS = 40) =>
  (p: Plant) =>
    connectorV(p, { perS, jumpV: [6, 9], openS: [1e-4, 6e-4], seed }).v;

describe('a healthy fan is not flagged', () => {
  it('no fault and no doubt on any sensor, 24-bit and 16-bit converters', () => {
    for (const bits of [24, 16]) {
      const w = windows(config(), record(4, {}, { bits }))[1]!;
      const a = assessWindow(config(), w);
      for (const h of a.sensors)
        expect({ id: h.id, problems: h.problems, doubts: h.doubts, bits }).toEqual({
          id: h.id,
          problems: [],
          doubts: [],
          bits,
        });
    }
  });

  it('a noiseless quantised sine is not "cut off": its peaks hold about 1.4 times the samples of the band below (own computation), not many times', () => {
    // Band at the top within tol of the peak, next band 3 tol to tol: for A cos, (sqrt 2 tol)/(sqrt
    // 6 tol - sqrt 2 tol) = 1.37.
    for (const bits of [12, 16, 24]) {
      const stage = new SignalFactsStage({
        sampleRate: FS,
        maxWindowSamples: 2 * FS,
        spikeRatio: 8,
        oneSidedRatio: 3,
      });
      const v = Float64Array.from(
        { length: 2 * FS },
        (_, i) => 2 * Math.sin((2 * Math.PI * 24.75 * i) / FS),
      );
      const q = convert(v, RAIL_V, bits);
      for (let i = 0; i < q.length; i += 2560) stage.add(q.subarray(i, i + 2560));
      const f = stage.facts()!;
      for (const pile of [f.pile_high, f.pile_low]) {
        expect(pile.below, `${bits} bits`).toBeGreaterThan(0);
        expect(pile.samples / pile.below, `${bits} bits`).toBeLessThan(2.5);
      }
    }
  });
});

describe('impulsive spikes: a bad connector is flagged, a bearing defect is not', () => {
  it('a bearing outer-race defect (impacts ringing a 3 kHz resonance at BPFO 83.5 Hz, modulated once per turn) leaves every sensor OK, although kurtosis and crest factor are high', () => {
    const cfg = config();
    // The defect is felt at all DE sensors (less in the other directions).
    const ws = windows(
      cfg,
      record(4, {
        'DE-V': { g: bearing(3) },
        'DE-H': { g: bearing(1.5) },
        'DE-A': { g: bearing(1) },
      }),
    );
    const w = ws[1]!;
    const sig = ch(w, 'DE-V').stats.signal!;
    // What kurtosis or crest-factor thresholds would call impulsive (Gaussian noise: kurtosis 3,
    // crest about 4.5 over 51 200 samples; a sine 1.5 and 1.41, textbook).
    expect(sig.kurtosis).toBeGreaterThan(5);
    expect(sig.crest_factor).toBeGreaterThan(5);
    expect(sig.impulses_one_sided).toBeLessThan(2);
    const a = assessWindow(cfg, w, { recent: [ws[0]!] });
    for (const h of a.sensors)
      expect({ id: h.id, problems: h.problems, doubts: h.doubts }).toEqual({
        id: h.id,
        problems: [],
        doubts: [],
      });
  });

  it('spaced heavy impacts (12 a second, 10 g) stand far above the level of the quiet spans but ring: still OK', () => {
    const cfg = config();
    const w = windows(cfg, record(4, { 'DE-V': { g: bearing(10, 12, 11) } }))[1]!;
    const sig = ch(w, 'DE-V').stats.signal!;
    // Counted as impulses (the quiet spans set the level), but two-sided.
    expect(sig.impulses).toBeGreaterThanOrEqual(15);
    expect(sig.peak_over_level).toBeGreaterThan(20);
    expect(sig.impulses_one_sided).toBeLessThan(2);
    expect(assessWindow(cfg, w).sensors.find((h) => h.id === 'DE-V')!.ok).toBe(true);
  });

  it('an intermittent connector (about 40 openings a second into the +/- 5 V rail, no full_scale_v): DE-V not OK, out of zones and votes, the machine zone from the others', () => {
    const cfg = config();
    const clean = windows(cfg, record(4))[1]!;
    const w = windows(cfg, record(4, { 'DE-V': { v: connector() } }))[1]!;
    const sig = ch(w, 'DE-V').stats.signal!;
    // Expected from the generator: about 40 x 2 s = 80 openings in the window (Poisson), each
    // one-sided; an impulse is counted when neither neighbouring 10 ms span holds one, chance
    // exp(-2 x 40/s x 0.01 s) = 0.45 (own computation): about 36 counted.
    expect(sig.impulses_one_sided).toBeGreaterThan(20);
    expect(sig.impulses_one_sided).toBeLessThan(60);
    // no limit configured: the old rule could not see it
    expect(ch(w, 'DE-V').stats.clipped_samples).toBe(0);
    // The spikes inflate the overall: more than 1.5 times the same sensor's clean overall.
    expect(ch(w, 'DE-V').overall_rms_mm_s!).toBeGreaterThan(
      1.5 * ch(clean, 'DE-V').overall_rms_mm_s!,
    );
    const a = assessWindow(cfg, w);
    const de = a.sensors.find((h) => h.id === 'DE-V')!;
    expect(de.ok).toBe(false);
    expect(de.faults.map((f) => f.code).sort()).toEqual(['pile_up', 'spikes']);
    expect(de.problems.join('\n')).toMatch(
      /impulsive spikes: \d+ separate one-sided impulses in 2\.0 s .* \(a loose connector or a damaged cable\)/,
    );
    expect(de.problems.join('\n')).toMatch(/cut off: \d+ samples .* sit at -?5\.000 V/);
    expect(a.zone.channels['DE-V']!.zone).toBeNull();
    expect(a.zone.channels['DE-V']!.status).toBe('not_ok');
    // Machine zone: the worst of the other sensors, the same as on the clean record without DE-V.
    const cleanA = assessWindow(cfg, clean);
    const others = (x: typeof a) =>
      Object.entries(x.zone.channels)
        .filter(([id]) => id !== 'DE-V')
        .map(([, c]) => c.zone);
    expect(others(a)).toEqual(others(cleanA));
    expect(a.zone.machine).not.toBe('D');
    expect(a.unbalance.limits.join('\n')).toMatch(/DE-V left out: impulsive spikes/);
  });

  it('the watcher raises sensor_not_ok once, and sensor_ok only after the spikes have been gone for ok_after_s (10 s = 5 windows)', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-faults-'));
    const cfg = config({ state_dir: dir });
    const seconds = 20;
    // Spikes during the first 6 s only.
    const spikes = (p: Plant) => {
      const v = connector(5)(p);
      for (let i = Math.round(6 * FS); i < v.length; i++) v[i] = 0;
      return v;
    };
    const ws = windows(cfg, record(seconds, { 'DE-V': { v: spikes } }));
    const w = openWatcher(cfg, new FakeClock(Date.parse('2031-03-02T08:00:00Z')));
    const byWindow: string[][] = ws.map((x) =>
      w
        .process(x)
        .events.filter((e: AgentEvent) => e['sensor'] === 'DE-V' && e.type.startsWith('sensor'))
        .map((e) => e.type),
    );
    expect(byWindow.slice(0, 3)).toEqual([['sensor_not_ok'], [], []]);
    // Clean from window 3 (6-8 s): OK once 10 s of clean data have passed, at the end of window
    // 7 (14-16 s).
    expect(byWindow.slice(3)).toEqual([[], [], [], [], ['sensor_ok'], [], []]);
  });
});

describe('cut off, saturated, quantisation only, level steps', () => {
  // A large blade-pass tone (10 x 24.75 Hz) of 40 g peak: 4 V at 100 mV/g, beyond what the sensor
  // below can give.
  const bladePass = (peakG: number) => (p: Plant) => {
    const n = Math.round(p.seconds * p.sampleRate);
    const g = new Float64Array(n);
    for (let i = 0; i < n; i++)
      g[i] = peakG * Math.sin((2 * Math.PI * 10 * p.rpm * i) / 60 / p.sampleRate);
    return g;
  };

  it('samples piling up at a rail nobody configured: not OK, "cut off"', () => {
    const cfg = config();
    // 60 g peak = 6 V into the +/- 5 V board.
    const w = windows(cfg, record(4, { 'NDE-H': { g: bladePass(60) } }))[1]!;
    const h = assessWindow(cfg, w).sensors.find((x) => x.id === 'NDE-H')!;
    expect(h.faults.map((f) => f.code)).toEqual(['pile_up']);
    expect(h.problems[0]).toMatch(
      /sit at 5\.000 V, the top of the signal.*set full_scale_v of this sensor/,
    );
  });

  it('with full_scale_v: 5 the same is the old "clipped" rule; a sensor whose output stops at 2.5 V is "saturated"', () => {
    const cfg = config({ sensors: (s) => ({ ...s, full_scale_v: 5 }) });
    const w = windows(cfg, record(4, { 'NDE-H': { g: bladePass(60) } }))[1]!;
    expect(
      assessWindow(cfg, w)
        .sensors.find((x) => x.id === 'NDE-H')!
        .faults.map((f) => f.code),
    ).toEqual(['clipped']);
    // The sensor's amplifier limits at +/- 2.5 V (converter rail at 2.5 V stands in for it; the
    // configured range is 5 V).
    const sat = windows(cfg, record(4, { 'NDE-H': { g: bladePass(40) } }, { railV: 2.5 }))[1]!;
    const h = assessWindow(cfg, sat).sensors.find((x) => x.id === 'NDE-H')!;
    expect(h.faults.map((f) => f.code)).toEqual(['saturation']);
    expect(h.problems[0]).toMatch(/saturated: .* at -?2\.500 V.*well inside the 5 V input range/);
  });

  it('a signal that is only quantisation noise while the fan turns (a 12-bit board, the input of NDE-A dead): not OK', () => {
    // A rougher fan (vibration x 3) so that the live sensors span many 2.44 mV steps of the 12-bit
    // +/- 5 V converter; DE-A left out (its 1.5 mm/s axial 1x is 2.4 mV peak, itself below two
    // steps).
    const cfg = config({ sensors: (s) => (s['id'] === 'DE-A' ? null : s) });
    const step = (2 * RAIL_V) / 2 ** 12;
    const u = normal(9);
    // The dead input toggles about its value (rounding of 0.35 step r.m.s. of pick-up: 2-4 steps in
    // all), about 1 mV r.m.s., far above the flat-line 0.2 mV.
    const dead = (p: Plant) =>
      Float64Array.from({ length: Math.round(p.seconds * FS) }, () => 0.35 * step * u());
    const extra: Extra = { 'NDE-A': { only: () => false, v: dead } };
    for (const id of ['DE-V', 'DE-H', 'NDE-V', 'NDE-H']) extra[id] = { scale: () => 3 };
    const w = windows(cfg, record(4, extra, { bits: 12 }))[1]!;
    const a = assessWindow(cfg, w);
    const h = a.sensors.find((x) => x.id === 'NDE-A')!;
    expect(ch(w, 'NDE-A').stats.ac_rms_v).toBeGreaterThan(0.0005);
    expect(h.faults.map((f) => f.code)).toEqual(['quantisation_only']);
    expect(h.problems[0]).toMatch(
      /only quantisation noise: the signal spans [2-4] converter steps of 2\.441 mV while the fan turns/,
    );
    for (const id of ['DE-V', 'DE-H', 'NDE-V', 'NDE-H'])
      expect(a.sensors.find((x) => x.id === id)!.ok, id).toBe(true);
  });

  it('a sudden 10x level step and back on one sensor while the others at its bearing stay steady: not OK', () => {
    const cfg = config();
    const step = (t: number) => (t >= 2.6 && t < 3.0 ? 10 : 1);
    const w = windows(cfg, record(4, { 'DE-V': { scale: step } }))[1]!;
    const h = assessWindow(cfg, w).sensors.find((x) => x.id === 'DE-V')!;
    expect(h.faults.map((f) => f.code)).toEqual(['level_step']);
    expect(h.problems[0]).toMatch(
      /sudden level step: the 100 ms r\.m\.s\. stepped \d+-fold .* while DE-H, DE-A at DE stayed steady/,
    );
  });

  it('the same step on a bearing with one sensor can be either: the sensor stays in, doubted, and cannot put the machine in zone D alone', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-faults-'));
    // Only NDE-V and the DE pair (DE-V, DE-H): NDE-V is alone at its bearing.
    const cfg = config({
      state_dir: dir,
      sensors: (s) => (['DE-V', 'DE-H', 'NDE-V'].includes(s['id'] as string) ? s : null),
    });
    // NDE-V at 10x for 1.2 s of every 2 s window: its overall goes far into D.
    const step = (t: number) => (t % 2 >= 0.4 && t % 2 < 1.6 ? 10 : 1);
    const ws = windows(cfg, record(10, { 'NDE-V': { scale: step } }));
    const a = assessWindow(cfg, ws[1]!);
    const h = a.sensors.find((x) => x.id === 'NDE-V')!;
    expect(h.ok).toBe(true);
    expect(h.doubts[0]).toMatch(
      /no other sensor at NDE can confirm it: a sensor fault or a real event/,
    );
    expect(a.zone.channels['NDE-V']!.zone).toBe('D');
    const w = openWatcher(cfg, new FakeClock(Date.parse('2031-03-02T08:00:00Z')));
    const events = ws.flatMap((x) => w.process(x).events);
    const machine = events.filter((e) => e.type === 'zone_changed' && e['scope'] === 'machine');
    expect(machine.map((e) => e['zone'])).toEqual(['C']);
    expect(machine[0]!['held_below_d_by']).toEqual(['NDE-V']);
    expect(events.filter((e) => e.type === 'sensor_doubtful').map((e) => e['sensor'])).toEqual([
      'NDE-V',
    ]);
    expect(w.status().confirmed.zones['NDE-V']).toBe('D');
    expect(w.status().confirmed.machine_zone).toBe('C');
  });
});

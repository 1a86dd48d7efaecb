import { describe, expect, it } from 'vitest';
import { rpmToRadS, STANDARD_GRAVITY_M_S2 } from '../drivers/sim/physics.js';
import {
  angleDiff,
  dft,
  FS,
  mean,
  plan,
  render,
  risingEdges,
  testConfig,
  testScenario,
} from './sim-fixtures.js';

/**
 * The synthesized channels checked with a plain DFT written in the test (sim-fixtures.ts), not with
 * the project's DSP. At 1500 r/min and 25 600 samples/s one revolution is exactly 1024 samples, so
 * a DFT over whole revolutions has no leakage.
 */

const REV = 1024;
const f1 = 1 / REV; // 1x in cycles per sample at 1500 r/min
const V_PER_G = 0.1;

/**
 * Expected acceleration (volts) of a velocity vector: a = omega v, leading velocity by 90 deg
 * (textbook).
 */
function expectedAccel(ampPkMmS: number, lagDegV: number, omega = rpmToRadS(1500), order = 1) {
  return {
    amp: (ampPkMmS * 1e-3 * omega * order * V_PER_G) / STANDARD_GRAVITY_M_S2,
    lag: lagDegV - 90,
  };
}

const rotorWith = (extra: Record<string, unknown>) => ({
  ...(testScenario().rotor as object),
  ...extra,
});
const faultScenario = (fault: Record<string, unknown>, rotor: Record<string, unknown> = {}) =>
  testScenario({ rotor: rotorWith(rotor), timeline: [{ at: 0, fault }] });

describe('synthesized signals', () => {
  it('puts the 1x the model predicts on every accelerometer channel: amplitude within 0.05 %, phase within 0.05 deg', () => {
    const p = plan();
    const { sim, ch } = render(p, 40 * REV);
    const model = sim.modelOrder(1);
    for (const s of p.sensors) {
      const m = model.find((x) => x.id === s.id)!;
      const exp = expectedAccel(m.amp_pk_mm_s, m.phase_deg);
      const got = dft(ch[s.channel]!, 8 * REV, 32 * REV, f1);
      expect(Math.abs(got.amp / exp.amp - 1)).toBeLessThan(5e-4);
      expect(Math.abs(angleDiff(got.lagDeg, exp.lag))).toBeLessThan(0.05);
    }
    // sanity of size: 40 g at 760 mm on this rotor gives a few mm/s
    expect(model.find((x) => x.id === 'DE-H')!.amp_pk_mm_s).toBeGreaterThan(0.5);
  });

  it('scales volts by the sensitivity per g with g = 9.80665 m/s^2 (standard gravity, 3rd CGPM 1901)', () => {
    // a 160 Hz velocity tone of 10 / (2 pi 160) m/s peak is 10 m/s^2 peak: 10 / 9.80665 g, x
    // 0.1 V/g
    const mmS = 10_000 / (2 * Math.PI * 160);
    const p = plan(
      testScenario({
        rotor: rotorWith({ unbalance: [] }),
        timeline: [{ at: 0, fault: { kind: 'tone', id: 't', freq_hz: 160, amp_pk_mm_s: mmS } }],
      }),
    );
    const { ch } = render(p, 2 * FS);
    const got = dft(ch[0]!, FS, FS, 160 / FS);
    expect(got.amp).toBeCloseTo((10 / 9.80665) * 0.1, 6);
  });

  it('puts the 50 % point of the tach rising edge on whole revolutions, recoverable between samples to 0.001 sample', () => {
    const p = plan();
    const { ch, edges } = render(p, 20 * REV);
    const found = risingEdges(ch[p.tach.channel]!, (p.tach.low_v + p.tach.high_v) / 2);
    expect(found.length).toBe(19);
    found.forEach((t, k) => expect(Math.abs(t - (k + 1) * REV)).toBeLessThan(1e-3));
    // the board-timed edges agree with the waveform
    expect(edges.length).toBe(19);
    edges.forEach((t, k) => expect(Math.abs(t - (k + 1) * REV)).toBeLessThan(1e-6));
  });

  it('keeps the tach mark and the 1x locked at a speed that is not a whole number of samples per revolution (1485 r/min)', () => {
    const p = plan(testScenario({ speed: { rpm: 1485 } }));
    const { sim, ch } = render(p, 60 * 1035);
    const period = (60 / 1485) * FS;
    const e = risingEdges(ch[p.tach.channel]!, 2.5);
    for (let k = 1; k < e.length; k++)
      expect(Math.abs(e[k]! - e[k - 1]! - period)).toBeLessThan(2e-3);
    // DFT over whole revolutions measured from one edge, at the exact 1x frequency
    const m = sim.modelOrder(1).find((x) => x.id === 'NDE-H')!;
    const exp = expectedAccel(m.amp_pk_mm_s, m.phase_deg, rpmToRadS(1485));
    const start = Math.ceil(e[5]!);
    const count = Math.round(40 * period);
    const got = dft(ch[4]!, start, count, 1 / period, e[5]!);
    expect(Math.abs(got.amp / exp.amp - 1)).toBeLessThan(3e-3);
    expect(Math.abs(angleDiff(got.lagDeg, exp.lag))).toBeLessThan(0.3);
  });

  it('adds unbalance responses linearly in the signal (superposition), so influence coefficients hold', () => {
    const one = (unbalance: unknown[]) => {
      const { ch } = render(plan(testScenario({ rotor: rotorWith({ unbalance }) })), 16 * REV);
      return dft(ch[3]!, 4 * REV, 12 * REV, f1);
    };
    const a = one([{ plane: 'P1', mass_g: 40, radius_mm: 760, angle_deg: 30 }]);
    const b = one([{ plane: 'P2', mass_g: 25, radius_mm: 760, angle_deg: 200 }]);
    const ab = one([
      { plane: 'P1', mass_g: 40, radius_mm: 760, angle_deg: 30 },
      { plane: 'P2', mass_g: 25, radius_mm: 760, angle_deg: 200 },
    ]);
    expect(Math.hypot(ab.re - a.re - b.re, ab.im - a.im - b.im)).toBeLessThan(1e-4 * ab.amp);
  });

  it('adds the IEPE bias as DC and holds the board input range', () => {
    const p = plan(testScenario(), testConfig({ bias: true }));
    const { ch } = render(p, 8 * REV);
    expect(mean(ch[0]!.subarray(4 * REV))).toBeCloseTo(10, 3);
    const clipped = plan(testScenario(), testConfig({ fullScale: 0.001 }));
    const c = render(clipped, 4 * REV).ch[1]!;
    expect(Math.max(...c)).toBeCloseTo(0.001, 6);
    expect(Math.min(...c)).toBeCloseTo(-0.001, 6);
  });

  it('makes white noise of the stated r.m.s.', () => {
    const p = plan(
      testScenario({ rotor: rotorWith({ unbalance: [] }), signal: { noise_rms_g: 0.01 } }),
    );
    const { ch } = render(p, FS);
    const x = ch[0]!;
    let sq = 0;
    for (const v of x) sq += v * v;
    expect(Math.sqrt(sq / x.length)).toBeCloseTo(0.01 * V_PER_G, 4);
  });
});

describe('speed profiles', () => {
  const speeds = (ch: Float32Array) => {
    const e = risingEdges(ch, 2.5);
    return e.slice(1).map((t, k) => ({ at_s: t / FS, rpm: (60 * FS) / (t - e[k]!) }));
  };

  it('starts up along a linear ramp to the set speed', () => {
    const p = plan(
      testScenario({ speed: { rpm: 0 }, timeline: [{ at: 0.5, start: { rpm: 1500, ramp_s: 4 } }] }),
    );
    const { ch } = render(p, 6 * FS);
    const s = speeds(ch[p.tach.channel]!);
    // during the ramp speed = 1500 * (t - 0.5) / 4; an interval's mean speed belongs to its middle,
    // half an interval (30 / rpm seconds) before the edge that closes it
    for (const x of s.filter((v) => v.at_s > 1.5 && v.at_s < 4.3)) {
      const mid = x.at_s - 30 / x.rpm;
      expect(Math.abs(x.rpm - (1500 * (mid - 0.5)) / 4)).toBeLessThan(1);
    }
    for (const x of s.filter((v) => v.at_s > 4.7)) expect(x.rpm).toBeCloseTo(1500, 1);
  });

  it('coasts down, slowing fastest at first (fan drag), and stands still by the stated time', () => {
    const p = plan(testScenario({ timeline: [{ at: 0.2, stop: { coast_s: 20 } }] }));
    const { ch } = render(p, 22 * FS);
    const s = speeds(ch[p.tach.channel]!);
    const at = (t: number) =>
      s.reduce((best, x) => (Math.abs(x.at_s - t) < Math.abs(best.at_s - t) ? x : best)).rpm;
    const drop1 = at(2.2) - at(4.2);
    const drop2 = at(12.2) - at(14.2);
    expect(drop1).toBeGreaterThan(drop2);
    expect(at(2.2)).toBeLessThan(1500);
    const lastEdge = s[s.length - 1]!.at_s;
    expect(lastEdge).toBeLessThan(20.2);
    expect(
      ch[p.tach.channel]!.subarray(Math.round(20.5 * FS)).every(
        (v) => v === ch[p.tach.channel]![Math.round(20.5 * FS)],
      ),
    ).toBe(true);
  });

  it('wanders slowly within the stated drift while steady', () => {
    const p = plan(testScenario({ speed: { rpm: 1500, drift_rpm: 3, drift_period_s: 4 } }));
    const { ch } = render(p, 8 * FS);
    const rpm = speeds(ch[p.tach.channel]!).map((x) => x.rpm);
    expect(Math.max(...rpm)).toBeGreaterThan(1502);
    expect(Math.min(...rpm)).toBeLessThan(1498);
    expect(Math.max(...rpm)).toBeLessThan(1503.01);
    expect(Math.min(...rpm)).toBeGreaterThan(1496.99);
  });
});

describe('fault signatures (common practice)', () => {
  const noUnbalance = { unbalance: [] };

  it('misalignment: 2x above 1x radially, axial 180 deg apart across the coupling', () => {
    const p = plan(
      faultScenario(
        { kind: 'misalignment', id: 'm', coupling_bearing: 'DE', amp_pk_mm_s: 4 },
        noUnbalance,
      ),
    );
    const { ch } = render(p, 16 * REV);
    const x1 = dft(ch[1]!, 0, 16 * REV, f1);
    const x2 = dft(ch[1]!, 0, 16 * REV, 2 * f1);
    expect(x2.amp).toBeGreaterThan(2 * x1.amp);
    const a0 = dft(ch[2]!, 0, 16 * REV, f1);
    const a1 = dft(ch[5]!, 0, 16 * REV, f1);
    expect(Math.abs(angleDiff(a0.lagDeg, a1.lagDeg))).toBeGreaterThan(175);
  });

  it('looseness: many harmonics and a 1x phase that wanders from block to block', () => {
    const p = plan(
      faultScenario(
        { kind: 'looseness', id: 'l', bearing: 'NDE', amp_pk_mm_s: 3, jitter_deg: 20 },
        noUnbalance,
      ),
    );
    const { ch } = render(p, 64 * REV);
    const x = ch[3]!;
    const strong = [1, 2, 3, 4, 5, 6].filter(
      (n) => dft(x, 0, 16 * REV, n * f1).amp > 0.25 * dft(x, 0, 16 * REV, f1).amp,
    );
    expect(strong.length).toBeGreaterThanOrEqual(5);
    const phases = [0, 1, 2, 3].map((b) => dft(x, b * 16 * REV, 16 * REV, f1).lagDeg);
    const spread = Math.max(...phases.map((a) => Math.abs(angleDiff(a, phases[0]!))));
    expect(spread).toBeGreaterThan(20);
  });

  it('bent shaft: axial 1x 180 deg apart end to end', () => {
    const p = plan(faultScenario({ kind: 'bent_shaft', id: 'b', amp_pk_mm_s: 3 }, noUnbalance));
    const { ch } = render(p, 16 * REV);
    const a0 = dft(ch[2]!, 0, 16 * REV, f1);
    const a1 = dft(ch[5]!, 0, 16 * REV, f1);
    expect(Math.abs(angleDiff(a0.lagDeg, a1.lagDeg))).toBeGreaterThan(179);
    expect(a0.amp).toBeCloseTo(expectedAccel(3, 0).amp, 5);
  });

  it('eccentricity: straight-line 1x, H and V in phase or 180 apart with a large amplitude ratio', () => {
    const p = plan(
      faultScenario({ kind: 'eccentricity', id: 'e', bearing: 'DE', amp_pk_mm_s: 3 }, noUnbalance),
    );
    const { ch } = render(p, 16 * REV);
    const v = dft(ch[0]!, 0, 16 * REV, f1);
    const h = dft(ch[1]!, 0, 16 * REV, f1);
    const d = Math.abs(angleDiff(v.lagDeg, h.lagDeg));
    expect(Math.min(d, 180 - d)).toBeLessThan(1);
    expect(v.amp / h.amp).toBeGreaterThan(3);
  });

  it('resonance near running speed: support at 1x gives about 90 deg more lag and a large rise in amplitude (SDOF, textbook)', () => {
    const base = plan();
    const reson = plan(
      testScenario({
        timeline: [
          { at: 0, support_change: { bearing: 'DE', direction: 'vertical', natural_hz: 25 } },
        ],
      }),
    );
    const a = dft(render(base, 16 * REV).ch[0]!, 4 * REV, 12 * REV, f1);
    const b = dft(render(reson, 16 * REV).ch[0]!, 4 * REV, 12 * REV, f1);
    const k = (hz: number) => {
      const r = 25 / hz;
      return Math.atan2(2 * 0.06 * r, 1 - r * r) * (180 / Math.PI);
    };
    const fnBase = base.geometry.bearings[0].support.vertical.natural_hz;
    expect(angleDiff(b.lagDeg, a.lagDeg)).toBeCloseTo(90 - k(fnBase), 1);
    expect(b.amp / a.amp).toBeGreaterThan(4);
    // H/V no longer near 90 apart: the vertical swung by about 90
    const h = dft(render(reson, 16 * REV).ch[1]!, 4 * REV, 12 * REV, f1);
    expect(Math.abs(Math.abs(angleDiff(h.lagDeg, b.lagDeg)) - 90)).toBeGreaterThan(45);
  });

  it('bearing defect: a non-synchronous tone at the defect order and a ringing carrier', () => {
    const p = plan(
      faultScenario(
        {
          kind: 'bearing_defect',
          id: 'bd',
          bearing: 'NDE',
          order: 3.58,
          amp_pk_mm_s: 1,
          ring_hz: 3000,
          ring_pk_g: 0.5,
        },
        noUnbalance,
      ),
    );
    const { ch } = render(p, FS);
    const fd = (3.58 * 25) / FS;
    const tone = dft(ch[3]!, 0, FS, fd);
    expect(tone.amp).toBeCloseTo(expectedAccel(1, 0, rpmToRadS(1500), 3.58).amp, 4);
    // ringing 0.5 g peak, modulated (1 + cos)/2: carrier at half, each sideband at a quarter
    expect(dft(ch[3]!, 0, FS, 3000 / FS).amp).toBeCloseTo(0.5 * 0.5 * V_PER_G, 4);
    expect(dft(ch[3]!, 0, FS, (3000 + 3.58 * 25) / FS).amp).toBeCloseTo(0.25 * 0.5 * V_PER_G, 4);
    expect(dft(ch[3]!, 0, FS, (3000 - 3.58 * 25) / FS).amp).toBeCloseTo(0.25 * 0.5 * V_PER_G, 4);
    expect(dft(ch[0]!, 0, FS, fd).amp).toBeLessThan(1e-9); // other bearing untouched
  });

  it('grows a fault over its ramp_days', () => {
    const p = plan(
      testScenario({
        rotor: rotorWith(noUnbalance),
        timeline: [{ at: 0, fault: { kind: 'bent_shaft', id: 'b', amp_pk_mm_s: 3, ramp_days: 2 } }],
      }),
    );
    const { ch } = render(p, 16 * REV, { startS: 86400 });
    expect(dft(ch[2]!, 0, 16 * REV, f1).amp).toBeCloseTo(expectedAccel(1.5, 0).amp, 5);
  });
});

describe('sensor faults', () => {
  const at = (sensor_fault: Record<string, unknown>) =>
    plan(testScenario({ timeline: [{ at: 0, sensor_fault }] }), testConfig({ bias: true }));

  it('open cable reads just below the supply, a short near 0 V', () => {
    expect(mean(render(at({ sensor: 'DE-V', kind: 'open' }), 4096).ch[0]!)).toBeCloseTo(23.7, 2);
    expect(mean(render(at({ sensor: 'DE-V', kind: 'short' }), 4096).ch[0]!)).toBeCloseTo(0.01, 2);
  });

  it('flat line is exactly constant, clipping holds the swing at the limit', () => {
    const flat = render(at({ sensor: 'NDE-H', kind: 'flat' }), 4096).ch[4]!;
    expect(flat.every((v) => v === flat[0])).toBe(true);
    const clip = render(at({ sensor: 'NDE-H', kind: 'clipping', gain: 20, limit_v: 0.05 }), 8192)
      .ch[4]!;
    expect(Math.max(...clip)).toBeCloseTo(10.05, 5);
    expect(Math.min(...clip)).toBeCloseTo(9.95, 5);
  });

  it('tach loss: no pulses; intermittent: about the stated share of pulses missing', () => {
    const lost = plan(testScenario({ timeline: [{ at: 0, tach_fault: { kind: 'lost' } }] }));
    const r = render(lost, 20 * REV);
    expect(risingEdges(r.ch[6]!, 2.5)).toHaveLength(0);
    expect(r.edges).toHaveLength(0);
    const inter = plan(
      testScenario({
        timeline: [{ at: 0, tach_fault: { kind: 'intermittent', missing_fraction: 0.3 } }],
      }),
    );
    const e = risingEdges(render(inter, 1000 * REV).ch[6]!, 2.5);
    expect(e.length).toBeGreaterThan(620);
    expect(e.length).toBeLessThan(780);
    // pulses that remain are still on whole revolutions
    for (const t of e) expect(Math.abs(t / REV - Math.round(t / REV))).toBeLessThan(1e-5);
  });
});

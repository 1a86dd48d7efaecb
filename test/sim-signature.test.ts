import { describe, expect, it } from 'vitest';
import type { Config } from '../agent/config/schema.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { assessWindow, type WindowAssessment } from '../agent/watcher/index.js';
import { rpmToRadS } from '../drivers/sim/physics.js';
import { FanSimulator } from '../drivers/sim/simulator.js';
import { SimSource } from '../drivers/sim/source.js';
import { angleDiff, plan, testConfig, testScenario } from './sim-fixtures.js';

/**
 * The unbalance signature from signals: the simulated fan (drivers/sim) renders each fault, the
 * measurement core (Analyzer) measures it in 2 s windows (the watcher's default window_s), and the
 * watcher's health and signature assessment judges the last window with the earlier ones as its
 * recent history, as the live watcher does (assessWindow: the path `turnwise analyze` takes).
 *
 * Each expectation names the trade rule behind it: the rules for what says unbalance and what says
 * something else (common practice) and the ISO 20816-3 zones. The simulator's
 * fault models are signature models (drivers/sim/faults.ts); the point here is that a signal
 * carrying the pattern reaches the right verdict through the DSP, not only a hand-made DSP result.
 *
 * The fan: test/sim-fixtures.ts (850 kg centre-hung rotor, bearings DE at 0 and NDE at 2400 mm,
 * planes at 1000 and 1400 mm, softer horizontal supports, 1500 r/min, 25.6 kHz, six sensors V/H/A),
 * with 0.01 g r.m.s. broadband noise so that no quiet axial channel reads as a flat line.
 */

const base = testScenario({ signal: { noise_rms_g: 0.01 } }) as Record<string, unknown> & {
  rotor: Record<string, unknown>;
};
const SUPPORT = base.rotor['support'] as Record<string, unknown>;

type Mass = { plane: string; mass_g: number; radius_mm: number; angle_deg: number };
const mass = (plane: string, mass_g: number, angle_deg: number, radius_mm = 760): Mass => ({
  plane,
  mass_g,
  radius_mm,
  angle_deg,
});

function scenario(
  over: {
    unbalance?: Mass[];
    rotor?: Record<string, unknown>;
    timeline?: unknown[];
    speed?: Record<string, unknown>;
  } = {},
): Record<string, unknown> {
  return {
    ...base,
    rotor: {
      ...base.rotor,
      ...over.rotor,
      ...(over.unbalance ? { unbalance: over.unbalance } : {}),
    },
    ...(over.speed ? { speed: over.speed } : {}),
    timeline: over.timeline ?? [],
  };
}

/** One fault appearing at the start, on the fixture's 40 g residual unbalance. */
const withFault = (fault: Record<string, unknown>, over: Parameters<typeof scenario>[0] = {}) =>
  scenario({ ...over, timeline: [{ at: 0, fault: { id: 'F1', ...fault } }] });

const WINDOW_S = 2;

interface Watched {
  readonly a: WindowAssessment;
  /** The windows judged, oldest first (the last one is the one assessed). */
  readonly windows: WindowResult[];
}

/**
 * Streams the scenario through SimSource and the Analyzer in 2 s windows on a fixed sample grid,
 * and assesses the last kept window with the earlier kept ones as recent history. `keep` drops
 * windows (e.g. those spanning a speed change), as the watcher's own history would hold only steady
 * ones.
 */
async function watch(
  scn: Record<string, unknown>,
  cfg: Config = testConfig(),
  opts: { windows?: number; keep?: (i: number) => boolean } = {},
): Promise<Watched> {
  const count = opts.windows ?? 6;
  const p = plan(scn, cfg);
  const block = 2560;
  const per = WINDOW_S * p.sampleRate;
  const src = new SimSource(p, { blockSamples: block, pace: 'fast', totalSamples: count * per });
  const info = await src.open();
  const an = new Analyzer({
    config: cfg,
    sampleRate: info.sampleRate,
    channelCount: info.channelCount,
    maxBlock: block,
  });
  const windows: WindowResult[] = [];
  let taken = 0;
  for await (const item of src.items()) {
    an.push(item);
    if (item.kind !== 'samples' || (item.startIndex + block) % per !== 0) continue;
    const w = an.takeWindow();
    if (opts.keep?.(taken) ?? true) windows.push(w);
    taken++;
  }
  const a = assessWindow(cfg, windows[windows.length - 1]!, {
    recent: windows.slice(0, -1),
    baseline: null,
  });
  return { a, windows };
}

const causes = (w: Watched) => w.a.unbalance.points_to.map((p) => p.cause).sort();
const evidence = (w: Watched) => w.a.unbalance.evidence.join('\n');
const oneX = (w: WindowResult, id: string) => w.channels.find((c) => c.id === id)!.orders['1']!;
const pair = (w: Watched, direction: string) =>
  w.a.unbalance.measures.bearing_pair!.directions.find((d) => d.direction === direction)!;

/**
 * Angle of a sum of plane forces, each scaled by a lever share: the bearing's force phasor
 * (degrees, as lag).
 */
function forceLag(parts: { share: number; mass_g: number; angle_deg: number }[]): number {
  let re = 0;
  let im = 0;
  for (const p of parts) {
    re += p.share * p.mass_g * Math.cos((p.angle_deg * Math.PI) / 180);
    im += p.share * p.mass_g * Math.sin((p.angle_deg * Math.PI) / 180);
  }
  return (Math.atan2(im, re) * 180) / Math.PI;
}

/** Lag of a single-degree-of-freedom receptance at frequency ratio r, degrees (textbook). */
const sdofLagDeg = (r: number, zeta: number) =>
  (Math.atan2(2 * zeta * r, 1 - r * r) * 180) / Math.PI;

describe('the four kinds of unbalance, from signals (common practice)', () => {
  it('static: the same mass at the same angle in both planes -> DE and NDE in phase, H 90 deg from V: static, high confidence', async () => {
    const w = await watch(scenario({ unbalance: [mass('P1', 40, 30), mass('P2', 40, 30)] }));
    const u = w.a.unbalance;
    expect(u.kind).toBe('static');
    expect(u.confidence).toBe('high');
    // bearing to bearing near 0 in one direction -> static (common practice)
    expect(pair(w, 'vertical').relation).toBe('in_phase');
    expect(pair(w, 'horizontal').relation).toBe('in_phase');
    expect(pair(w, 'vertical').phase_diff_deg).toBeLessThan(1);
    // same bearing, H vs V about 90 apart (+/-30) with a ratio below about 3 (common practice); the
    // model's supports (35 and 25 MN/m, well below resonance) give about 92 deg and 1.7
    for (const b of ['DE', 'NDE']) {
      expect(Math.abs(u.measures.bearings[b]!.hv_phase_diff_deg! - 90)).toBeLessThan(30);
      expect(u.measures.bearings[b]!.hv_amp_ratio!).toBeLessThan(3);
    }
    // 1x dominates, 2x small (common practice)
    expect(u.measures.one_x_share!).toBeGreaterThan(0.99);
    expect(u.measures.two_x_over_one_x!).toBeLessThan(0.05);
    expect(evidence(w)).toMatch(
      /1x phase steady: a median 0 deg from one window to the next over the last 6 windows/,
    );
    // ISO 20816-3 group 2 rigid, zone boundaries 1.4 / 2.8 / 4.5 mm/s r.m.s.
    const top = Math.max(...w.windows[5]!.channels.map((c) => c.overall_rms_mm_s!));
    expect(top).toBeGreaterThan(4.5);
    expect(w.a.zone.machine).toBe('D');
  });

  it('couple: equal masses 180 deg apart in the two planes -> DE and NDE opposed: couple', async () => {
    const w = await watch(scenario({ unbalance: [mass('P1', 60, 30), mass('P2', 60, 210)] }));
    expect(w.a.unbalance.kind).toBe('couple');
    // near 180 -> couple (common practice)
    expect(pair(w, 'vertical').phase_diff_deg).toBeGreaterThan(179);
    expect(evidence(w)).toMatch(
      /vertical: DE and NDE 1x are 180 deg apart, opposed \(couple pattern\)/,
    );
  });

  it('dynamic: unequal angles in the two planes -> bearings neither in phase nor opposed, by the lever rule: dynamic', async () => {
    const w = await watch(scenario({ unbalance: [mass('P1', 60, 30), mass('P2', 60, 190)] }));
    expect(w.a.unbalance.kind).toBe('dynamic');
    // Expected separation from statics (lever rule, beam on two supports): DE carries 1400/2400 of
    // P1's force and 1000/2400 of P2's, NDE the reverse; both bearings' supports are alike, so
    // their 1x differ by the angle between the two bearing forces.
    const de = forceLag([
      { share: 1400 / 2400, mass_g: 60, angle_deg: 30 },
      { share: 1000 / 2400, mass_g: 60, angle_deg: 190 },
    ]);
    const nde = forceLag([
      { share: 1000 / 2400, mass_g: 60, angle_deg: 30 },
      { share: 1400 / 2400, mass_g: 60, angle_deg: 190 },
    ]);
    const expected = Math.abs(angleDiff(de, nde));
    expect(expected).toBeGreaterThan(60);
    expect(expected).toBeLessThan(120);
    for (const d of ['vertical', 'horizontal']) {
      expect(Math.abs(pair(w, d).phase_diff_deg - expected)).toBeLessThan(1);
      expect(pair(w, d).relation).toBe('between');
    }
  });

  it('overhung: impeller outboard of both bearings -> high axial 1x in phase at both bearings: overhung', async () => {
    const cfg = testConfig({ rotor: 'overhung' });
    // 400 kg, bearings 1000 mm apart, impeller 400 mm outboard of NDE; supports stiff enough to
    // stay above running speed (ISO 20816-3 "rigid": lowest natural frequency at least 25 % above
    // it)
    const w = await watch(
      scenario({
        rotor: {
          mass_kg: 400,
          centre_of_mass_mm: 1100,
          bearings: [
            { name: 'DE', position_mm: 0 },
            { name: 'NDE', position_mm: 1000 },
          ],
          planes: [{ name: 'P1', position_mm: 1400 }],
        },
        unbalance: [mass('P1', 40, 30, 500)],
      }),
      cfg,
    );
    const u = w.a.unbalance;
    expect(u.kind).toBe('overhung');
    // overhung rotor: high axial 1x, the two bearings' axial readings in phase (common practice)
    expect(pair(w, 'axial').relation).toBe('in_phase');
    expect(u.measures.bearings['DE']!.axial_over_radial!).toBeGreaterThan(0.5);
    expect(evidence(w)).toMatch(
      /axial 1x is high \(DE \d+ % of radial\) with both axial readings in phase/,
    );
    // the far bearing is pushed the other way (negative lever share): radial 1x about 180 apart,
    // which the overhung verdict takes precedence over
    expect(pair(w, 'vertical').relation).toBe('opposed');
  });
});

describe('1x that is not unbalance, from signals (common practice)', () => {
  it('misalignment at the DE coupling, fan sensors only: high 2x and axial 180 deg apart -> none, misalignment or a bent shaft (no driver-side sensor to tell them apart)', async () => {
    const w = await watch(
      withFault({ kind: 'misalignment', coupling_bearing: 'DE', amp_pk_mm_s: 3 }),
    );
    expect(w.a.unbalance.kind).toBe('none');
    expect(causes(w)).toEqual(['bent_shaft', 'misalignment']);
    expect(w.a.unbalance.limits.join('\n')).toMatch(
      /misalignment cannot be told from a bent shaft with these sensors/,
    );
    // high 2x (at or above half the 1x, the configured default) and high axial
    // 180 apart -> misalignment
    expect(w.a.unbalance.measures.two_x_over_one_x!).toBeGreaterThan(0.5);
    expect(pair(w, 'axial').phase_diff_deg).toBeGreaterThan(150);
    expect(w.a.unbalance.points_to[0]!.why).toMatch(
      /2x is \d+ % of 1x at DE-V \(high 2x\); axial 1x is high .* apart end to end, with high 2x/,
    );
  });

  it('bent shaft: high axial 1x 180 deg apart end to end, small 2x -> none, points to a bent shaft', async () => {
    const w = await watch(withFault({ kind: 'bent_shaft', amp_pk_mm_s: 3 }));
    expect(w.a.unbalance.kind).toBe('none');
    expect(causes(w)).toEqual(['bent_shaft']);
    expect(w.a.unbalance.measures.two_x_over_one_x!).toBeLessThan(0.05);
    expect(pair(w, 'axial').phase_diff_deg).toBeGreaterThan(150);
    expect(evidence(w)).toMatch(
      /axial 1x is high \(DE \d+ %, NDE \d+ % of radial\) and \d+ deg apart end to end: points to a bent shaft/,
    );
  });

  it('eccentricity at DE: straight-line 1x, H and V in phase with a large ratio -> none, points to the directional causes', async () => {
    // a well balanced rotor (5 g residual) so the eccentric motion dominates at DE
    const w = await watch(
      withFault(
        { kind: 'eccentricity', bearing: 'DE', amp_pk_mm_s: 6 },
        { unbalance: [mass('P1', 5, 30)] },
      ),
    );
    const u = w.a.unbalance;
    expect(u.kind).toBe('none');
    // straight-line (directional) motion: H/V near 0 or 180 -> eccentricity, looseness, resonance,
    // weak support
    expect(causes(w)).toEqual(['eccentricity', 'looseness', 'resonance', 'weak_support']);
    // the model's line of action is 15 deg past the vertical: V/H = cos 15 / cos 75 = 3.7, in
    // phase; the residual unbalance's elliptical motion pulls the measured pair a little towards it
    expect(u.measures.bearings['DE']!.hv_phase_diff_deg!).toBeLessThan(30);
    expect(u.measures.bearings['DE']!.hv_amp_ratio!).toBeGreaterThan(2.5);
    expect(u.measures.bearings['NDE']!.hv_phase_diff_deg!).toBeGreaterThan(60);
    expect(u.points_to[0]!.why).toMatch(
      /^DE: horizontal and vertical 1x are \d+ deg apart with H\/V ratio [\d.]+ \(straight-line, directional motion\)$/,
    );
  });

  it('looseness at DE: many harmonics and half orders, erratic phase -> none, points to looseness', async () => {
    const w = await watch(withFault({ kind: 'looseness', bearing: 'DE', amp_pk_mm_s: 5 }));
    const u = w.a.unbalance;
    expect(u.kind).toBe('none');
    // many harmonics (three or more orders >= 2 or half orders above 20 % of 1x) -> looseness
    expect(causes(w)).toContain('looseness');
    expect(evidence(w)).toMatch(
      /DE-V shows \d+ harmonics or half orders above 20 % of 1x \(.*0\.5x.*1\.5x.*\): points to looseness/,
    );
    // the harmonic series carries much of the overall: 1x is under the 70 % share unbalance needs
    expect(u.measures.one_x_share!).toBeLessThan(0.7);
    // The 2x rule (2x at or above half the 1x) also lists misalignment here: the looseness model's
    // 2x is 1/sqrt(2) of its 1x, and that rule alone cannot tell the two apart; the half orders
    // can. The NDE bearing, away from the loose joint, still moves elliptically.
    expect(Math.abs(u.measures.bearings['NDE']!.hv_phase_diff_deg! - 90)).toBeLessThan(30);
  });

  it('support resonance near running speed: 1x swings in amplitude and about 90 deg of phase over a small speed change -> none, points to resonance', async () => {
    // Both horizontal supports moved to 25.25 Hz (1515 r/min), 2 % damping; the speed is stepped
    // from 1480 to 1540 r/min (4 %) every 4 s; the first window after each step (with the 0.5 s
    // ramp) is dropped.
    const speeds = [1480, 1495, 1505, 1515, 1525, 1540];
    const fn = 25.25;
    const zeta = 0.02;
    const timeline: unknown[] = [
      ...['DE', 'NDE'].map((b) => ({
        at: 0,
        support_change: {
          bearing: b,
          direction: 'horizontal',
          natural_hz: fn,
          damping_ratio: zeta,
        },
      })),
      ...speeds.slice(1).map((rpm, i) => ({ at: 4 * (i + 1), speed: { rpm, ramp_s: 0.5 } })),
    ];
    const w = await watch(scenario({ speed: { rpm: speeds[0] }, timeline }), testConfig(), {
      windows: 2 * speeds.length,
      keep: (i) => i % 2 === 1,
    });
    const u = w.a.unbalance;
    expect(w.windows.map((x) => Math.round(x.speed_rpm!))).toEqual(speeds);
    expect(u.kind).toBe('none');
    // 1x that changes sharply with small speed changes and swings phase about 90 -> resonance
    expect(causes(w)).toContain('resonance');
    expect(evidence(w)).toMatch(
      /DE-H: 1x amplitude changed [\d.]+-fold and its phase swung up to \d+ deg from its mean while speed changed only 4\.0 %: points to resonance/,
    );
    // The swing is the support's: single-degree-of-freedom lag from 1480 to 1540 r/min (textbook);
    // the force's own phase does not move with speed.
    const r = (rpm: number) => rpmToRadS(rpm) / (2 * Math.PI * fn);
    const expectedSwing = sdofLagDeg(r(1540), zeta) - sdofLagDeg(r(1480), zeta);
    const measuredSwing = angleDiff(
      oneX(w.windows[5]!, 'DE-H').phase_deg,
      oneX(w.windows[0]!, 'DE-H').phase_deg,
    );
    expect(expectedSwing).toBeGreaterThan(70);
    expect(Math.abs(measuredSwing - expectedSwing)).toBeLessThan(2);
    // the amplitude peaks at the step nearest the natural frequency (1515 r/min)
    const amps = w.windows.map((x) => oneX(x, 'DE-H').amp_rms_mm_s);
    expect(amps.indexOf(Math.max(...amps))).toBe(3);
  });

  it('a softened horizontal support: H/V 1x ratio far above 3 -> none, points to resonance or weak support', async () => {
    const timeline = ['DE', 'NDE'].map((b) => ({
      at: 0,
      support_change: { bearing: b, direction: 'horizontal', stiffness_mn_per_m: 5 },
    }));
    const w = await watch(scenario({ timeline }));
    const u = w.a.unbalance;
    expect(u.kind).toBe('none');
    // H/V amplitude ratio above about 3 (the support much stiffer one way) -> resonance or weak
    // support
    expect(causes(w)).toEqual(['resonance', 'weak_support']);
    for (const b of ['DE', 'NDE']) expect(u.measures.bearings[b]!.hv_amp_ratio!).toBeGreaterThan(3);
    // Same mass on a fifth of the stiffness: the natural frequency falls by sqrt(5)
    // (f_n = sqrt(k/m)/2pi), here from 38.6 Hz (25 MN/m, 425 kg) to 17.3 Hz, below running speed.
    const fnBefore = Math.sqrt(25e6 / 425) / (2 * Math.PI);
    const sim = new FanSimulator(plan(scenario({ timeline })));
    expect(sim.state.support(0, 'horizontal', 0).natural_hz).toBeCloseTo(
      fnBefore / Math.sqrt(5),
      6,
    );
  });

  it('unstable 1x phase at steady speed: a neighbouring machine at 1518 r/min beating with the 1x at NDE -> none, points to unstable phase', async () => {
    // A fixed 25.3 Hz tone (not tied to the shaft) at NDE, 3 mm/s pk: synchronous averaging over
    // 2 s leaves part of it, turning 0.3 Hz x 2 s = 216 deg from one window to the next.
    const w = await watch(
      withFault({ kind: 'tone', bearing: 'NDE', freq_hz: 25.3, amp_pk_mm_s: 3 }),
    );
    const u = w.a.unbalance;
    expect(u.kind).toBe('none');
    // unstable 1x phase at steady speed -> not a fixed heavy spot (median window-to-window jump
    // above 30 deg)
    expect(causes(w)).toContain('unstable_phase');
    expect(u.measures.phase_step_deg!).toBeGreaterThan(30);
    expect(evidence(w)).toMatch(
      /NDE-\w: 1x phase jumps a median \d+ deg from one window to the next over the last 6 windows \(speed within 0\.0 %\)/,
    );
    // the DE bearing, away from the tone, still reads a steady elliptical 1x
    expect(Math.abs(u.measures.bearings['DE']!.hv_phase_diff_deg! - 90)).toBeLessThan(30);
  });

  it('a bearing defect tone carrying most of the vibration: 1x not dominant -> none, not mainly unbalance', async () => {
    const w = await watch(
      withFault({ kind: 'bearing_defect', bearing: 'DE', order: 3.58, amp_pk_mm_s: 6 }),
    );
    const u = w.a.unbalance;
    expect(u.kind).toBe('none');
    // 1x must dominate (at least 70 % of the overall) for unbalance
    expect(u.measures.one_x_share!).toBeLessThan(0.7);
    expect(evidence(w)).toMatch(
      /1x is only \d+ % of the overall r\.m\.s\. .*: most of the vibration is at other frequencies, so it is not mainly unbalance/,
    );
    expect(u.points_to).toEqual([]);
    // the DSP finds the defect tone at 3.58 orders as a non-synchronous peak
    const peaks = w.windows[5]!.channels.find((c) => c.id === 'DE-V')!.nonsync_peaks;
    expect(peaks.some((p) => Math.abs(p.order - 3.58) < 0.05)).toBe(true);
  });
});

describe('sensor and tach faults, from signals (machinery-protection practice, API 670 from memory)', () => {
  const cfg = testConfig({ bias: true }); // healthy IEPE bias 8-12 V DC (common practice)
  const staticRotor = { unbalance: [mass('P1', 40, 30), mass('P2', 40, 30)] };

  it('an open cable on NDE-V during static unbalance: the channel is not OK and left out, the verdict stays static', async () => {
    const w = await watch(
      scenario({
        ...staticRotor,
        timeline: [{ at: 0, sensor_fault: { sensor: 'NDE-V', kind: 'open' } }],
      }),
      cfg,
    );
    const a = w.a;
    expect(a.sensors.find((s) => s.id === 'NDE-V')!.ok).toBe(false);
    // open cable reads near the 24 V supply (common practice)
    expect(a.unbalance.limits.join('\n')).toMatch(
      /NDE-V left out: bias 23\.\d\d V outside its 8-12 V window \(open cable or sensor\)/,
    );
    expect(a.unbalance.kind).toBe('static');
    expect(a.unbalance.confidence).toBe('medium');
    expect(a.unbalance.measures.bearing_pair!.directions.map((d) => d.direction)).toEqual([
      'horizontal',
      'axial',
    ]);
    // a channel whose sensor has failed takes no part in the zone (API 670 practice, from memory)
    expect(a.zone.channels['NDE-V']!.zone).toBeNull();
  });

  it('a flat line on NDE-H while the fan turns: not OK, the NDE H/V rule is not checked', async () => {
    const w = await watch(
      scenario({
        ...staticRotor,
        timeline: [{ at: 0, sensor_fault: { sensor: 'NDE-H', kind: 'flat' } }],
      }),
      cfg,
    );
    expect(w.a.sensors.find((s) => s.id === 'NDE-H')!.problems.join('; ')).toMatch(
      /flat line: 0\.000 mV r\.m\.s\. while the fan turns/,
    );
    expect(w.a.unbalance.kind).toBe('static');
    expect(w.a.unbalance.limits.join('\n')).toMatch(
      /NDE: no healthy horizontal sensor, the H\/V rule was not checked there/,
    );
  });

  it('tach lost while the fan runs: no phase rules and no verdict, zones still judged', async () => {
    const w = await watch(
      scenario({ ...staticRotor, timeline: [{ at: 0, tach_fault: { kind: 'lost' } }] }),
      cfg,
    );
    expect(w.a.tach.state).toBe('lost');
    expect(w.a.unbalance.kind).toBe('none');
    expect(w.a.unbalance.confidence).toBe('low');
    expect(w.a.unbalance.limits.join('\n')).toMatch(
      /no phase rules: no usable revolutions \(0 tach edges\) while the fan vibrates/,
    );
    expect(w.a.zone.machine).toBe('D');
  });
});

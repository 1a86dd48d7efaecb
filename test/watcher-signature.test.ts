import { describe, expect, it } from 'vitest';
import { assessWindow } from '../agent/watcher/assess.js';
import { resolveWatcherSettings } from '../agent/watcher/settings.js';
import { pulsesPerRevHint } from '../agent/watcher/zones.js';
import type { WindowResult } from '../agent/dsp/types.js';
import {
  demoConfig,
  fanCase,
  synthWindow,
  type FanCase,
  type WindowSpec,
} from './support/fan-windows.js';

/**
 * Unbalance signature. The patterns and thresholds are the trade's rules (common practice):
 * 1x dominates; H and V about 90 deg apart (+/-30) with H/V ratio
 * below about 3; bearing-to-bearing near 0 = static, near 180 = couple, in between = dynamic; high
 * in-phase axial on an overhung rotor; high 2x with axial 180 apart = misalignment; straight-line
 * motion = eccentricity, looseness, resonance or weak support; unstable phase = no fixed heavy
 * spot.
 */

const cfg = demoConfig();

/**
 * Windows of one state with a little phase and amplitude jitter, as a steady fan gives (oldest
 * first).
 */
function series(c: FanCase, n: number): WindowResult[] {
  const out: WindowResult[] = [];
  for (let i = 0; i < n; i++) {
    out.push(
      synthWindow(
        fanCase(c, {
          phase: 40 + (i % 2 ? 3 : -3),
          amp: 4 * (1 + 0.02 * (i % 3)),
          start_index: i * 51200,
        }),
      ),
    );
  }
  return out;
}

function judge(windows: readonly WindowResult[], config = cfg) {
  return assessWindow(config, windows[windows.length - 1]!, {
    recent: windows.slice(0, -1),
    baseline: null,
  }).unbalance;
}

describe('unbalance signature: the four kinds (common practice)', () => {
  it('static: both bearings in phase -> static, high confidence with every rule checked', () => {
    const u = judge(series('static', 6));
    expect(u.kind).toBe('static');
    expect(u.confidence).toBe('high');
    expect(u.points_to).toEqual([]);
    expect(u.evidence.join('\n')).toMatch(/vertical: DE and NDE 1x are 12 deg apart, in phase/);
    expect(u.evidence.join('\n')).toMatch(
      /DE: horizontal and vertical 1x are 90 deg apart with H\/V ratio 1\.3: elliptical/,
    );
    expect(u.evidence.join('\n')).toMatch(/1x phase steady/);
    expect(u.measures.bearing_pair!.directions.map((d) => d.relation)).toEqual([
      'in_phase',
      'in_phase',
      'between',
    ]);
  });

  it('couple: bearings about 180 apart -> couple', () => {
    const u = judge(series('couple', 6));
    expect(u.kind).toBe('couple');
    expect(u.evidence.join('\n')).toMatch(/175 deg apart, opposed \(couple pattern\)/);
  });

  it('dynamic: bearings neither in phase nor opposed (95 apart) -> dynamic', () => {
    const u = judge(series('dynamic', 6));
    expect(u.kind).toBe('dynamic');
    expect(u.measures.bearing_pair!.directions[0]!.phase_diff_deg).toBeCloseTo(95, 6);
  });

  it('overhung rotor: high in-phase axial -> overhung', () => {
    const overhung = demoConfig({ machine: { rotor: 'overhung' } });
    const u = judge(series('overhung', 6), overhung);
    expect(u.kind).toBe('overhung');
    expect(u.evidence.join('\n')).toMatch(/axial 1x is high .* both axial readings in phase/);
  });

  it('overhung pattern on a rotor configured centre-hung: overhung, and the config is questioned', () => {
    const u = judge(series('overhung', 6));
    expect(u.kind).toBe('overhung');
    expect(u.evidence.join('\n')).toMatch(/machine\.rotor says centre_hung, check it/);
  });
});

describe('1x that is not unbalance (common practice)', () => {
  it('high 2x and axial 180 apart end to end, no sensor on the driver side: misalignment cannot be told from a bent shaft', () => {
    const u = judge(series('misalignment', 6));
    expect(u.kind).toBe('none');
    expect(u.points_to.map((p) => p.cause)).toEqual(['misalignment', 'bent_shaft']);
    expect(u.points_to[0]!.why).toMatch(/2x is 90 % of 1x/);
    expect(u.points_to[0]!.why).toMatch(
      /axial 1x is high .* 178 deg apart end to end, with high 2x/,
    );
    expect(u.limits.join('\n')).toMatch(
      /no sensor on the driver side of the coupling \(watcher\.unbalance\.coupling\): misalignment cannot be told from a bent shaft with these sensors/,
    );
  });

  it('axial 180 apart without high 2x on one shaft -> bent shaft', () => {
    const spec = fanCase('misalignment');
    const lowTwoX = { ...spec, orders: undefined };
    const windows = [0, 1, 2, 3].map((i) => synthWindow({ ...lowTwoX, start_index: i * 51200 }));
    const u = judge(windows);
    expect(u.kind).toBe('none');
    expect(u.points_to.map((p) => p.cause)).toEqual(['bent_shaft']);
  });

  it('directional 1x: H and V in phase with a large ratio -> none, points to eccentricity, looseness, resonance, weak support', () => {
    const u = judge(series('directional', 6));
    expect(u.kind).toBe('none');
    expect(u.points_to.map((p) => p.cause).sort()).toEqual([
      'eccentricity',
      'looseness',
      'resonance',
      'weak_support',
    ]);
    expect(u.points_to[0]!.why).toMatch(
      /DE: horizontal and vertical 1x are 5 deg apart with H\/V ratio 4\.6 \(straight-line/,
    );
    expect(u.measures.bearings['NDE']!.hv_phase_diff_deg).toBeCloseTo(175, 6);
  });

  it('unsteady 1x phase at steady speed -> none, unstable phase (not a fixed heavy spot)', () => {
    const phases = [40, 110, 20, 95, 170, 60];
    const windows = phases.map((p, i) =>
      synthWindow(fanCase('static', { phase: p, start_index: i * 51200 })),
    );
    const u = judge(windows);
    expect(u.kind).toBe('none');
    expect(u.points_to.map((p) => p.cause)).toEqual(['unstable_phase']);
    // Window-to-window jumps 70, 90, 75, 75, 110 deg: median 75, above the 30 deg tolerance.
    expect(u.measures.phase_step_deg!).toBe(75);
  });

  it('a single phase step (a lost weight) or a slow drift (build-up) is not unstable phase', () => {
    const step = [40, 40, 40, 120, 120, 120].map((p, i) =>
      synthWindow(fanCase('static', { phase: p, start_index: i * 51200 })),
    );
    expect(judge(step).kind).toBe('static');
    const drift = [40, 52, 64, 76, 88, 100].map((p, i) =>
      synthWindow(fanCase('static', { phase: p, start_index: i * 51200 })),
    );
    expect(judge(drift).kind).toBe('static');
  });

  it('1x that swings in amplitude and phase with a small speed change -> resonance', () => {
    const steps = [
      { speed: 1470, amp: 2, phase: 0 },
      { speed: 1476, amp: 3, phase: 45 },
      { speed: 1482, amp: 4.5, phase: 90 },
      { speed: 1488, amp: 3, phase: 135 },
      { speed: 1494, amp: 2, phase: 180 },
    ];
    const windows = steps.map((s, i) =>
      synthWindow(
        fanCase('static', {
          amp: s.amp,
          phase: s.phase,
          speed_rpm: s.speed,
          start_index: i * 51200,
        }),
      ),
    );
    const u = judge(windows);
    expect(u.kind).toBe('none');
    expect(u.points_to.map((p) => p.cause)).toEqual(['resonance']);
  });

  it('1x not dominant: a large non-synchronous content -> none, not mainly unbalance', () => {
    const spec = fanCase('static');
    const broadband = Object.fromEntries(
      Object.entries(spec.oneX).map(([id, v]) => [id, 2 * v.amp]),
    );
    const windows = [0, 1, 2].map((i) =>
      synthWindow({ ...spec, broadband, start_index: i * 51200 }),
    );
    const u = judge(windows);
    expect(u.kind).toBe('none');
    expect(u.measures.one_x_share!).toBeLessThan(0.7);
    // 1x / overall = 1 / sqrt(1 + 0.1^2 + 0.05^2 + 2^2) = 0.447 (2x, 3x and broadband from the
    // synthesizer).
    expect(u.evidence.join('\n')).toMatch(/1x is only 45 % of the overall/);
  });

  it('a quiet fan -> none, with no cause and no alarm', () => {
    const windows = series('quiet', 6);
    const a = assessWindow(cfg, windows[5]!, { recent: windows.slice(0, 5) });
    expect(a.unbalance.kind).toBe('none');
    expect(a.unbalance.points_to).toEqual([]);
    expect(a.unbalance.evidence[0]).toMatch(
      /largest radial 1x is 0\.35 mm\/s r\.m\.s\. at DE-V, below the 0\.70 mm\/s needed/,
    );
    expect(a.zone.machine).toBe('A');
  });
});

describe('faulty and missing sensors', () => {
  it('a sensor fault during static unbalance gives no false verdict from the broken channel', () => {
    // NDE-V shorted (bias 0.3 V) and reading a spurious 1x opposed to DE-V: used, it would say
    // "couple".
    const spec = fanCase('static');
    const broken: WindowSpec = {
      ...spec,
      oneX: { ...spec.oneX, 'NDE-V': { amp: 6, phase: 220 } },
      stats: { 'NDE-V': { dc_v: 0.3 } },
    };
    const windows = [0, 1, 2, 3, 4, 5].map((i) =>
      synthWindow({ ...broken, start_index: i * 51200 }),
    );
    const a = assessWindow(cfg, windows[5]!, { recent: windows.slice(0, 5), baseline: null });
    expect(a.unbalance.kind).toBe('static');
    expect(a.unbalance.limits.join('\n')).toMatch(
      /NDE-V left out: bias 0\.30 V outside its 8-12 V window \(short circuit or no sensor power\)/,
    );
    expect(a.unbalance.measures.bearing_pair!.directions.map((d) => d.direction)).toEqual([
      'horizontal',
      'axial',
    ]);
    expect(a.unbalance.confidence).toBe('medium');
    expect(a.zone.channels['NDE-V']!.status).toBe('not_ok');
    expect(a.zone.channels['NDE-V']!.zone).toBeNull();
    // Machine zone from the healthy channels only: DE-V at 4.2 mm/s overall is zone C (ISO 20816-3
    // group 2 rigid, B/C 2.8, C/D 4.5).
    expect(a.zone.machine).toBe('C');
  });

  it('clipping and a flat line are sensor faults; a stopped fan is not a flat line', () => {
    const spec = fanCase('static');
    const w = synthWindow({
      ...spec,
      stats: { 'DE-H': { clipped_samples: 900 }, 'NDE-H': { ac_rms_v: 0.00005 } },
    });
    const a = assessWindow(cfg, w);
    const byId = Object.fromEntries(a.sensors.map((s) => [s.id, s]));
    expect(byId['DE-H']!.problems[0]).toMatch(/clipped: 900 of 51200 samples/);
    expect(byId['NDE-H']!.problems[0]).toMatch(
      /flat line: 0\.050 mV r\.m\.s\. while the fan turns/,
    );
    expect(byId['DE-V']!.ok).toBe(true);

    const stopped = synthWindow({
      oneX: { 'DE-V': { amp: 0.01, phase: 0 }, 'NDE-V': { amp: 0.01, phase: 0 } },
      tachEdges: 0,
      broadband: { 'DE-V': 0.02, 'NDE-V': 0.02 },
      stats: { 'DE-V': { ac_rms_v: 0.00005 } },
    });
    const s = assessWindow(cfg, stopped);
    expect(s.tach.state).toBe('stopped');
    expect(s.sensors.find((x) => x.id === 'DE-V')!.ok).toBe(true);
  });

  it('tach lost while running: no phase rules, no verdict, zones still judged', () => {
    const spec = fanCase('static');
    const w = synthWindow({ ...spec, tachEdges: 0 });
    const a = assessWindow(cfg, w);
    expect(a.tach.state).toBe('lost');
    expect(a.unbalance.kind).toBe('none');
    expect(a.unbalance.confidence).toBe('low');
    expect(a.unbalance.limits.join('\n')).toMatch(/no phase rules: no usable revolutions/);
    expect(a.zone.machine).toBe('C');
  });

  it('no horizontal sensors: a verdict from the vertical ones, with the gap stated', () => {
    const noH = demoConfig({ sensors: (s) => (s['direction'] === 'horizontal' ? null : s) });
    const spec = fanCase('couple');
    const windows = [0, 1, 2, 3].map((i) => synthWindow({ ...spec, start_index: i * 51200 }));
    const u = judge(windows, noH);
    expect(u.kind).toBe('couple');
    expect(u.confidence).toBe('medium');
    expect(u.limits.join('\n')).toMatch(
      /DE: no healthy horizontal sensor, the H\/V rule was not checked there/,
    );
  });

  it('one bearing only: no static/couple claim; the general case with low confidence', () => {
    const deOnly = demoConfig({ sensors: (s) => (s['bearing'] === 'DE' ? s : null) });
    const spec = fanCase('static');
    const windows = [0, 1, 2, 3].map((i) => synthWindow({ ...spec, start_index: i * 51200 }));
    const u = judge(windows, deOnly);
    expect(u.kind).toBe('dynamic');
    expect(u.confidence).toBe('low');
    expect(u.limits.join('\n')).toMatch(
      /only one bearing has radial sensors: static, couple and dynamic unbalance cannot be told apart/,
    );
  });

  it('a single vertical sensor and one window: low confidence, every gap named, no crash', () => {
    const one = demoConfig({ sensors: (s) => (s['id'] === 'DE-V' ? s : null) });
    const u = assessWindow(one, synthWindow(fanCase('static'))).unbalance;
    expect(u.kind).toBe('dynamic');
    expect(u.confidence).toBe('low');
    expect(u.limits.join('\n')).toMatch(/no healthy axial sensor/);
    expect(u.limits.join('\n')).toMatch(/1x phase stability not judged: 1 window/);
  });

  it('a sensor mounted on the opposite side (mounting angle 180) is corrected before comparing', () => {
    const flipped = demoConfig({
      sensors: (s) => (s['id'] === 'NDE-V' ? { ...s, mounting_angle_deg: 180 } : s),
    });
    const spec = fanCase('static');
    const sensors = [
      {
        id: 'DE-V',
        channel: 0,
        bearing: 'DE',
        direction: 'vertical' as const,
        mounting_angle_deg: 0,
      },
      {
        id: 'DE-H',
        channel: 1,
        bearing: 'DE',
        direction: 'horizontal' as const,
        mounting_angle_deg: 0,
      },
      { id: 'DE-A', channel: 2, bearing: 'DE', direction: 'axial' as const, mounting_angle_deg: 0 },
      {
        id: 'NDE-V',
        channel: 3,
        bearing: 'NDE',
        direction: 'vertical' as const,
        mounting_angle_deg: 180,
      },
      {
        id: 'NDE-H',
        channel: 4,
        bearing: 'NDE',
        direction: 'horizontal' as const,
        mounting_angle_deg: 0,
      },
      {
        id: 'NDE-A',
        channel: 5,
        bearing: 'NDE',
        direction: 'axial' as const,
        mounting_angle_deg: 0,
      },
    ];
    // The flipped sensor reads 180 deg more than a sensor in the reference position would.
    const oneX = {
      ...spec.oneX,
      'NDE-V': { amp: spec.oneX['NDE-V']!.amp, phase: spec.oneX['NDE-V']!.phase + 180 },
    };
    const windows = [0, 1, 2, 3].map((i) =>
      synthWindow({ ...spec, oneX, sensors, start_index: i * 51200 }),
    );
    const u = judge(windows, flipped);
    expect(u.kind).toBe('static');
  });
});

/**
 * A tach.pulses_per_rev that does not match the pickup makes every "revolution" 1/k of a turn or k
 * turns: the speed reads rated x k or rated / k and the 1x is not the shaft's 1x. The project's own
 * rule (no standard): a steady speed within 3 % of rated x k or rated / k, k = 2..4, with a whole
 * pulses_per_rev that would fit.
 */
describe('a speed that betrays a wrong tach.pulses_per_rev', () => {
  const rated = 1485; // machine.rated_rpm of config/example.yaml (invented demo fan)
  const withPpr = (ppr: number) => demoConfig({ tach: { pulses_per_rev: ppr } });
  const hint = (ppr: number, speed: number, spread = 0.001) => {
    const w = {
      ...synthWindow(fanCase('static', { speed_rpm: speed })),
      speed_min_rpm: speed * (1 - spread),
      speed_max_rpm: speed * (1 + spread),
    };
    return pulsesPerRevHint(resolveWatcherSettings(withPpr(ppr)), w);
  };

  it('names the pulses_per_rev that would fit, within 3 % of rated x k or rated / k', () => {
    expect(hint(2, rated / 2)).toMatchObject({ configured: 2, fits: 1, speed_ratio: 0.5 });
    expect(hint(2, (rated / 2) * 1.029)!.fits).toBe(1);
    expect(hint(2, (rated / 2) * 0.971)!.fits).toBe(1);
    expect(hint(3, rated / 3)!.fits).toBe(1);
    expect(hint(4, rated / 2)!.fits).toBe(2);
    expect(hint(4, rated / 4)!.fits).toBe(1);
    expect(hint(1, rated * 2)).toMatchObject({ configured: 1, fits: 2, speed_ratio: 2 });
    expect(hint(1, rated * 3)!.fits).toBe(3);
    expect(hint(2, rated * 4)!.fits).toBe(8);
    expect(hint(2, rated / 2)!.why).toMatch(
      /743 r\/min is about 1\/2 of machine\.rated_rpm \(1485\).*tach\.pulses_per_rev is probably wrong.*set tach\.pulses_per_rev: 1/,
    );
  });

  it('says nothing at rated speed, beyond 3 %, for k above 4, when no whole value fits, while the speed moves, or without rated_rpm', () => {
    expect(hint(1, rated)).toBeNull();
    expect(hint(2, rated * 0.98)).toBeNull();
    expect(hint(2, (rated / 2) * 1.04)).toBeNull();
    expect(hint(2, (rated / 2) * 0.96)).toBeNull();
    expect(hint(1, rated * 5)).toBeNull();
    expect(hint(5, rated / 5)).toBeNull();
    // no half pulse per turn: the fan really runs at half speed
    expect(hint(1, rated / 2)).toBeNull();
    expect(hint(3, rated / 2)).toBeNull();
    // 2 % spread: starting or coasting through rated / 2
    expect(hint(2, rated / 2, 0.01)).toBeNull();
    expect(hint(2, rated / 2, 0.007)!.fits).toBe(1); // 1.4 %: steady enough
    const noRated = demoConfig({ machine: { rated_rpm: undefined }, tach: { pulses_per_rev: 2 } });
    expect(
      pulsesPerRevHint(
        resolveWatcherSettings(noRated),
        synthWindow(fanCase('static', { speed_rpm: rated / 2 })),
      ),
    ).toBeNull();
  });

  it('the unbalance verdict claims no high confidence then, and says why', () => {
    // The reported case: a 1-pulse tach with pulses_per_rev 2 reads half speed and a 1x near 0.
    const quietHalf = synthWindow(fanCase('quiet', { speed_rpm: rated / 2 }));
    const right = assessWindow(withPpr(1), quietHalf, { baseline: null }).unbalance;
    expect(right.kind).toBe('none');
    // control: without the hint the same window is a confident "none"
    expect(right.confidence).toBe('high');
    const wrong = assessWindow(withPpr(2), quietHalf, { baseline: null });
    expect(wrong.unbalance.confidence).toBe('low');
    expect(wrong.unbalance.limits[0]).toMatch(
      /^confidence held low: .*tach\.pulses_per_rev is probably wrong.*set tach\.pulses_per_rev: 1/,
    );
    expect(wrong.speed.pulses_per_rev_hint!.fits).toBe(1);
    // A clear static pattern too: never high while the hint stands.
    const steady = [0, 1, 2, 3, 4, 5].map((i) =>
      synthWindow(
        fanCase('static', {
          speed_rpm: rated * 2,
          phase: 40 + (i % 2 ? 3 : -3),
          start_index: i * 51200,
        }),
      ),
    );
    const u = judge(steady, withPpr(1));
    expect(u.confidence).toBe('low');
    expect(u.limits.join('\n')).toMatch(
      /about 2 x machine\.rated_rpm.*set tach\.pulses_per_rev: 2/,
    );
  });
});

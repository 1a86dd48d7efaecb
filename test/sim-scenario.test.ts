import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadConfig } from '../agent/config/load.js';
import { UserError } from '../agent/errors.js';
import { lagDeg, magnitude, sub } from '../drivers/sim/physics.js';
import { formatAt, loadScenario, parseAt, resolveScenario } from '../drivers/sim/scenario.js';
import { FanSimulator } from '../drivers/sim/simulator.js';
import { angleDiff, plan, testConfig, testScenario } from './sim-fixtures.js';

function messageOf(f: () => unknown): string {
  try {
    f();
  } catch (e) {
    expect(e).toBeInstanceOf(UserError);
    return (e as UserError).message;
  }
  throw new Error('expected a UserError');
}

function writeTmp(text: string): string {
  const f = join(mkdtempSync(join(tmpdir(), 'tw-scn-')), 'scenario.yaml');
  writeFileSync(f, text);
  return f;
}

const rotor = testScenario().rotor as Record<string, unknown>;

describe('the demo scenario (invented Kessrow Board Mill fan ID-3A)', () => {
  const cfg = loadConfig('config/example.yaml');
  const p = resolveScenario(
    loadScenario('config/example-scenario.yaml'),
    cfg,
    'config/example-scenario.yaml',
    'config/example.yaml',
  );

  it('matches the example config: 7 channels, tach on 6, 25.6 kHz, 850 kg rotor at 1485 r/min', () => {
    expect(p.channelCount).toBe(7);
    expect(p.tach.channel).toBe(6);
    expect(p.sampleRate).toBe(25600);
    expect(p.sensors.map((s) => s.id)).toEqual(['DE-V', 'DE-H', 'DE-A', 'NDE-V', 'NDE-H', 'NDE-A']);
    expect(p.ratedOmega).toBeCloseTo((1485 * 2 * Math.PI) / 60, 9);
    expect(loadScenario('config/example-scenario.yaml').rotor.mass_kg).toBe(850);
  });

  it("tells the week's story: balanced at commissioning, build-up moves the 1x from day 3, the thrown weight on day 5 raises it more than 2.5 times", () => {
    const oneX = (day: number) =>
      new FanSimulator(p, { startS: day * 86400 }).modelOrder(1).find((v) => v.id === 'NDE-H')!;
    const d1 = oneX(1);
    const d3 = oneX(3);
    const d5 = oneX(5.5);
    const d6 = oneX(5.7);
    expect(d1.amp_pk_mm_s / Math.SQRT2).toBeLessThan(1.4); // zone A for group 2 rigid (ISO 20816-3)
    expect(Math.abs(angleDiff(d3.phase_deg, d1.phase_deg))).toBeLessThan(1);
    expect(Math.abs(angleDiff(d5.phase_deg, d3.phase_deg))).toBeGreaterThan(30);
    expect(d6.amp_pk_mm_s / d5.amp_pk_mm_s).toBeGreaterThan(2.5);
    expect(d6.amp_pk_mm_s / Math.SQRT2).toBeGreaterThan(2.8); // into zone C (above B/C 2.8 mm/s)
  });

  it('reports the events of the timeline as they take effect', () => {
    const seen: string[] = [];
    const sim = new FanSimulator(p, {
      startS: 5 * 86400 + 14 * 3600 + 19 * 60 + 58,
      onEvent: (e) => seen.push(e.text),
    });
    const ch = Array.from({ length: 7 }, () => new Float32Array(25600 * 3));
    sim.render(ch, ch[0]!.length);
    expect(seen).toEqual(['day 5 14:20:00 weight W1 thrown']);
  });
});

describe('timeline state', () => {
  it('grows build-up linearly with time and sheds the stated share', () => {
    const p = plan(
      testScenario({
        rotor: { ...rotor, unbalance: [] },
        timeline: [
          {
            at: 'day 1',
            build_up: { plane: 'P2', mass_g_per_day: 12, radius_mm: 500, angle_deg: 90 },
          },
          { at: 'day 3', build_up_shed: { plane: 'P2', fraction: 0.25 } },
        ],
      }),
    );
    const u = (day: number) =>
      new FanSimulator(p, { startS: day * 86400 }).state.unbalance(day * 86400)[1]!;
    expect(magnitude(u(0.5))).toBe(0);
    expect(magnitude(u(2))).toBeCloseTo(12e-3 * 0.5, 12);
    expect(lagDeg(u(2))).toBeCloseTo(90, 9);
    // 24 g by day 3, a quarter flakes off, then 12 g more per day
    expect(magnitude(u(3.5))).toBeCloseTo((24 * 0.75 + 6) * 1e-3 * 0.5, 12);
  });

  it('takes a thrown weight off the rotor and fits an added one', () => {
    const p = plan(
      testScenario({
        rotor: {
          ...rotor,
          unbalance: [],
          weights: [{ id: 'W1', plane: 'P1', mass_g: 30, radius_mm: 700, angle_deg: 45 }],
        },
        timeline: [
          { at: 'day 2', weight_thrown: { id: 'W1' } },
          {
            at: 'day 3',
            weight_added: { id: 'W2', plane: 'P1', mass_g: 10, radius_mm: 700, angle_deg: 0 },
          },
        ],
      }),
    );
    const u = (day: number) =>
      new FanSimulator(p, { startS: day * 86400 }).state.unbalance(day * 86400)[0]!;
    expect(magnitude(u(1))).toBeCloseTo(0.021, 12);
    expect(magnitude(u(2.5))).toBe(0);
    expect(magnitude(u(4))).toBeCloseTo(0.007, 12);
  });

  it('starts a run from a later day in the state the timeline reaches by then, at scaled scenario time', () => {
    const p = plan(
      testScenario({
        speed: { rpm: 0 },
        timeline: [
          { at: 'day 0 01:00', start: { rpm: 1500, ramp_s: 10 } },
          {
            at: 'day 2',
            weight_added: { id: 'T', plane: 'P1', mass_g: 10, radius_mm: 760, angle_deg: 0 },
          },
        ],
      }),
    );
    const sim = new FanSimulator(p, { startS: 86400 * 1.9, timeScale: 3600 });
    expect(sim.speedRpm).toBeCloseTo(1500, 9);
    const before = sim.state.unbalance(sim.scenarioTimeS)[0]!;
    const ch = Array.from({ length: 7 }, () => new Float32Array(25600 * 3));
    sim.render(ch, ch[0]!.length); // 3 s of signal = 3 h of scenario: past day 2
    const after = sim.state.unbalance(sim.scenarioTimeS)[0]!;
    expect(magnitude(sub(after, before))).toBeCloseTo(0.0076, 12);
    expect(sim.scenarioTimeS).toBeCloseTo(86400 * 1.9 + 3 * 3600, 6);
  });

  it('parses and writes event times', () => {
    expect(parseAt('day 5 14:20')).toBe(5 * 86400 + 14 * 3600 + 20 * 60);
    expect(parseAt('day 0')).toBe(0);
    expect(parseAt('Day 2 01:02:03.5')).toBe(2 * 86400 + 3723.5);
    expect(parseAt(90)).toBe(90);
    for (const bad of ['day 5 25:00', 'dya 5', '5d', -1, 'day 1 10:61'])
      expect(parseAt(bad)).toBeUndefined();
    expect(formatAt(5 * 86400 + 14 * 3600 + 20 * 60 + 7)).toBe('day 5 14:20:07');
  });
});

describe('scenario errors name the file, the path and what to do', () => {
  it('names bad values and unknown keys by path', () => {
    const f = writeTmp(
      [
        'scenario: bad',
        'sample_rate_hz: 25600',
        'rotor:',
        '  mass_kg: -5',
        '  bearings: [{name: DE, position_mm: 0}, {name: NDE, position_mm: 2000}]',
        '  planes: [{name: P1, position_mm: 1000}]',
        '  support: {vertical: {stiffness_mn_per_m: 30}, horizontal: ' +
          '{stiffness_mn_per_m: 20}, axial: {stiffness_mn_per_m: 50}}',
        'timeline:',
        '  - {at: dya 5, weight_thrown: {id: W1}}',
        '  - {at: day 3, fault: {kind: wobble, id: x}}',
        '  - {at: day 4, build_up: {plane: P1, mass_g_per_day: 3, radius_mm: 700, angle: 40}}',
      ].join('\n'),
    );
    const msg = messageOf(() => loadScenario(f));
    expect(msg).toContain(`${f}: rotor.mass_kg:`);
    expect(msg).toContain('(found -5)');
    expect(msg).toMatch(/timeline\[0\]\.at: expected seconds from the start .* \(found "dya 5"\)/);
    expect(msg).toContain('timeline[1].fault.kind: Invalid discriminator value');
    expect(msg).toContain('(found "wobble")');
    expect(msg).toContain('timeline[2].build_up: unknown key(s) "angle"');
    expect(msg).toContain('docs/simulator.md, "Scenario file"');
  });

  it('checks across keys once each key is valid: one action per event, time order, tach edge', () => {
    const msg = messageOf(() =>
      plan(
        testScenario({
          tach: { rise_us: 20 },
          timeline: [
            { at: 'day 2', stop: {} },
            { at: 'day 1', start: { rpm: 1500 } },
            { at: 'day 3', start: { rpm: 1500 }, stop: {} },
            { at: 'day 4' },
          ],
        }),
      ),
    );
    expect(msg).toContain('timeline[1].at: is before timeline[0].at (day 2 00:00:00)');
    expect(msg).toContain('timeline[2]: give one action per event, found start and stop');
    expect(msg).toContain('timeline[3]: give one action: start, stop,');
    expect(msg).toContain('tach.rise_us: must span at least two sample periods');
  });

  it('checks names against the rotor and the config', () => {
    const msg = messageOf(() =>
      plan(
        testScenario({
          timeline: [
            { at: 0, weight_thrown: { id: 'W9' } },
            {
              at: 1,
              build_up: { plane: 'front', mass_g_per_day: 1, radius_mm: 700, angle_deg: 0 },
            },
            { at: 2, sensor_fault: { sensor: 'DE-X', kind: 'open' } },
            { at: 3, fault: { kind: 'looseness', id: 'l', bearing: 'MOTOR', amp_pk_mm_s: 2 } },
            { at: 4, fault_cleared: { id: 'nope' } },
            { at: 5, sensor_fault: { sensor: 'DE-V', kind: 'clipping' } },
          ],
        }),
      ),
    );
    expect(msg).toContain(
      'test-scenario: timeline[0].weight_thrown.id: no ' +
        'weight "W9" on the rotor at that time (fitted: none)',
    );
    expect(msg).toContain('timeline[1].build_up.plane: no plane "front" in rotor.planes (P1, P2)');
    expect(msg).toContain('timeline[2].sensor_fault.sensor: no sensor "DE-X" in test-config');
    expect(msg).toContain(
      'timeline[3].fault.bearing: no bearing "MOTOR" in rotor.bearings (DE, NDE)',
    );
    expect(msg).toContain('timeline[4].fault_cleared.id: no fault "nope" is active');
    expect(msg).toContain('timeline[5].sensor_fault.limit_v: needed for kind clipping');
  });

  it('refuses a scenario that does not fit the config', () => {
    const msg = messageOf(() =>
      plan(testScenario({ tach: { high_v: 2 } }), testConfig({ rotor: 'overhung' })),
    );
    expect(msg).toContain(
      'test-scenario: rotor.planes: the planes are between the ' +
        'bearings (centre-hung) but test-config machine.rotor is overhung',
    );
    expect(msg).toContain(
      'test-scenario: tach: the pulse (0 to 2 V) never crosses test-config tach.trigger_v (2.5 V)',
    );
    const renamed = messageOf(() =>
      plan(
        testScenario({
          rotor: {
            ...rotor,
            bearings: [
              { name: 'A', position_mm: 0 },
              { name: 'B', position_mm: 2400 },
            ],
          },
        }),
      ),
    );
    expect(renamed).toContain(
      'test-config: sensors[0].bearing: bearing "DE" is not in test-scenario rotor.bearings (A, B)',
    );
  });

  it('reports YAML syntax errors with a line, and a missing file', () => {
    expect(() => loadScenario(writeTmp('scenario: x\nrotor: [unclosed\n'))).toThrow(
      /not valid YAML at line \d+/,
    );
    expect(() => loadScenario('/nonexistent/s.yaml')).toThrow(/scenario file not found/);
  });
});

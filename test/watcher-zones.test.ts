import { describe, expect, it } from 'vitest';
import { assessWindow } from '../agent/watcher/assess.js';
import { OnDelay } from '../agent/watcher/debounce.js';
import {
  baselineAlarmMmS,
  classifyZone,
  iso14694Limits,
  iso20816Limits,
  zoneWithHysteresis,
  type Zone,
} from '../agent/watcher/limits.js';
import { UserError } from '../agent/errors.js';
import { demoConfig, fanCase, synthWindow } from './support/fan-windows.js';

/** Values in mm/s r.m.s. of broadband velocity on the bearing housing. */
describe('ISO 20816-3 zone boundaries (ISO 20816-3 zone boundary table for groups 1 and 2, velocity r.m.s.)', () => {
  // [group, support, A/B, B/C, C/D] as the standard tabulates them.
  const table: [1 | 2, 'rigid' | 'flexible', number, number, number][] = [
    [1, 'rigid', 2.3, 4.5, 7.1],
    [1, 'flexible', 3.5, 7.1, 11.0],
    [2, 'rigid', 1.4, 2.8, 4.5],
    [2, 'flexible', 2.3, 4.5, 7.1],
  ];
  for (const [group, support, ab, bc, cd] of table) {
    it(`group ${group}, ${support}: A/B ${ab}, B/C ${bc}, C/D ${cd} mm/s`, () => {
      const l = iso20816Limits(group, support);
      expect([l.ab_mm_s, l.bc_mm_s, l.cd_mm_s]).toEqual([ab, bc, cd]);
      // A value on a boundary belongs to the zone below; just above it, to the zone above.
      const cases: [number, Zone][] = [
        [0, 'A'],
        [ab, 'A'],
        [ab + 0.01, 'B'],
        [bc, 'B'],
        [bc + 0.01, 'C'],
        [cd, 'C'],
        [cd + 0.01, 'D'],
        [100, 'D'],
      ];
      for (const [v, z] of cases) expect(classifyZone(v, l), `${v} mm/s`).toBe(z);
    });
  }

  it('the config picks the boundaries from machine.group and machine.support', () => {
    const w = synthWindow(fanCase('static', { amp: 3 })); // DE-V overall 3.18 mm/s
    expect(
      assessWindow(demoConfig({ machine: { group: 2, support: 'rigid' } }), w).zone.channels[
        'DE-V'
      ]!.zone,
    ).toBe('C'); // 2.8 < 3.18 <= 4.5
    expect(
      assessWindow(demoConfig({ machine: { group: 1, support: 'rigid' } }), w).zone.channels[
        'DE-V'
      ]!.zone,
    ).toBe('B'); // 2.3 < 3.18 <= 4.5
    expect(
      assessWindow(demoConfig({ machine: { group: 1, support: 'flexible' } }), w).zone.channels[
        'DE-V'
      ]!.zone,
    ).toBe('A'); // <= 3.5
  });
});

describe('ISO 14694 fan limits (from memory: check against the current edition)', () => {
  // [category, mounting, start-up, alarm, shut-down] in mm/s r.m.s., ISO 14694 in-situ limits from
  // memory.
  const table: ['BV-3' | 'BV-4', 'rigid' | 'flexible', number, number, number][] = [
    ['BV-3', 'rigid', 4.5, 7.1, 9.0],
    ['BV-3', 'flexible', 6.3, 11.8, 12.5],
    ['BV-4', 'rigid', 2.8, 4.5, 7.1],
    ['BV-4', 'flexible', 4.5, 7.1, 11.2],
  ];
  for (const [cat, mounting, startup, alarm, shutdown] of table) {
    it(`${cat} ${mounting}: start-up ${startup}, alarm ${alarm}, shut-down ${shutdown} mm/s map to A/B, B/C, C/D`, () => {
      const l = iso14694Limits(cat, mounting);
      expect([l.ab_mm_s, l.bc_mm_s, l.cd_mm_s]).toEqual([startup, alarm, shutdown]);
      expect(l.basis).toMatch(/from memory/);
      expect(classifyZone(alarm, l)).toBe('B');
      expect(classifyZone(alarm + 0.01, l)).toBe('C');
    });
  }

  it('is selected by watcher.limits with the fan category; mounting defaults to machine.support', () => {
    const cfg = demoConfig({ watcher: { limits: { source: 'iso14694', category: 'BV-3' } } });
    // DE-V overall 5.3 mm/s
    const a = assessWindow(cfg, synthWindow(fanCase('static', { amp: 5 })));
    expect(a.zone.limits.basis).toMatch(/ISO 14694 BV-3, rigid mounting/);
    expect(a.zone.channels['DE-V']!.zone).toBe('B'); // 4.5 < 5.3 <= 7.1
  });

  it('custom limits must rise A/B < B/C < C/D', () => {
    expect(() =>
      demoConfig({ watcher: { limits: { source: 'custom', ab_mm_s: 3, bc_mm_s: 2, cd_mm_s: 5 } } }),
    ).toThrow(/watcher\.limits\.ab_mm_s: ab_mm_s < bc_mm_s < cd_mm_s is required/);
    const cfg = demoConfig({
      watcher: { limits: { source: 'custom', ab_mm_s: 1, bc_mm_s: 2, cd_mm_s: 3 } },
    });
    expect(
      assessWindow(cfg, synthWindow(fanCase('static', { amp: 2.5 }))).zone.channels['DE-V']!.zone,
    ).toBe('C');
  });

  it('ISO 14694 without a category is refused by name', () => {
    expect(() => demoConfig({ watcher: { limits: { source: 'iso14694' } } })).toThrow(
      /watcher\.limits\.category/,
    );
  });
});

describe('baseline-relative alarm (ISO 20816-3: baseline + 0.25 x B/C, normally not above 1.25 x B/C)', () => {
  it('adds a quarter of B/C to the baseline and caps at 1.25 x B/C', () => {
    // Group 2 rigid, B/C = 2.8 mm/s.
    expect(baselineAlarmMmS(1.0, 2.8)).toBeCloseTo(1.0 + 0.7, 12);
    expect(baselineAlarmMmS(2.8, 2.8)).toBeCloseTo(3.5, 12); // 2.8 + 0.7 = 3.5 = 1.25 x 2.8
    expect(baselineAlarmMmS(3.2, 2.8)).toBeCloseTo(3.5, 12); // capped
    expect(baselineAlarmMmS(null, 2.8)).toBe(2.8); // no baseline: the B/C boundary
  });

  it('is applied per sensor once a baseline with overall values exists', () => {
    const cfg = demoConfig({
      watcher: {
        baseline: {
          channels: { 'DE-V': { one_x_rms_mm_s: 1.0, one_x_phase_deg: 40, overall_rms_mm_s: 1.1 } },
        },
      },
    });
    // DE-V overall 1.9 mm/s
    const a = assessWindow(cfg, synthWindow(fanCase('static', { amp: 1.8 })));
    expect(a.zone.channels['DE-V']!.alarm_mm_s).toBeCloseTo(1.8, 12); // 1.1 + 0.25 x 2.8
    expect(a.zone.channels['DE-V']!.over_alarm).toBe(true);
    expect(a.zone.channels['DE-V']!.zone).toBe('B'); // over the alarm while still in zone B
    expect(a.zone.channels['DE-H']!.alarm_mm_s).toBe(2.8);
  });

  it('names a baseline sensor that does not exist', () => {
    const cfg = demoConfig({
      watcher: { baseline: { channels: { 'DE-X': { one_x_rms_mm_s: 1, one_x_phase_deg: 0 } } } },
    });
    expect(() => assessWindow(cfg, synthWindow(fanCase('static')))).toThrow(UserError);
    expect(() => assessWindow(cfg, synthWindow(fanCase('static')))).toThrow(
      /watcher\.baseline\.channels\.DE-X: no sensor with id "DE-X"/,
    );
  });
});

describe('hysteresis and on-delay (common practice: no chatter at a boundary)', () => {
  const l = iso20816Limits(2, 'rigid'); // B/C 2.8 mm/s

  it('rises at once, drops only 5 % below the boundary', () => {
    expect(zoneWithHysteresis(2.81, 'B', l, 0.05)).toBe('C');
    expect(zoneWithHysteresis(2.75, 'C', l, 0.05)).toBe('C'); // needs <= 0.95 x 2.8 = 2.66
    expect(zoneWithHysteresis(2.67, 'C', l, 0.05)).toBe('C');
    expect(zoneWithHysteresis(2.65, 'C', l, 0.05)).toBe('B');
    expect(zoneWithHysteresis(1.0, 'D', l, 0.05)).toBe('A');
    expect(zoneWithHysteresis(2.75, null, l, 0.05)).toBe('B');
  });

  it('on-delay: a one-window blip is not reported, a lasting change is, after the delay', () => {
    const d = new OnDelay<Zone>(20, 'B');
    expect(d.update('C', 0, 10)).toBeNull(); // blip
    expect(d.update('B', 10, 20)).toBeNull();
    expect(d.update('C', 20, 30)).toBeNull(); // 10 s so far
    expect(d.update('C', 30, 40)).toEqual({ from: 'B', to: 'C' }); // 20 s held
    expect(d.value).toBe('C');
    // A restarted sample clock starts the timing afresh.
    expect(d.update('D', 40, 50)).toBeNull();
    expect(d.update('D', 0, 10)).toBeNull();
    expect(d.update('D', 10, 20)).toEqual({ from: 'C', to: 'D' });
  });

  it('at the defaults (2 s delay, windows of whole revolutions, so at least 2 s) one window confirms; a delay above the window length needs two that agree', () => {
    const w = demoConfig().watcher;
    expect(w).toMatchObject({ on_delay_s: 2, window_s: 2 });
    const one = new OnDelay<Zone>(w.on_delay_s, 'B');
    expect(one.update('C', 0, 2.08)).toEqual({ from: 'B', to: 'C' });
    const two = new OnDelay<Zone>(4, 'B');
    expect(two.update('C', 0, 2.08)).toBeNull();
    expect(two.update('B', 2.08, 4.16)).toBeNull(); // the second window disagrees: nothing reported
    expect(two.update('C', 4.16, 6.24)).toBeNull();
    expect(two.update('C', 6.24, 8.32)).toEqual({ from: 'B', to: 'C' });
  });
});

describe('start-up and coast-down', () => {
  it('below the minimum speed share, zones are held ("inhibit")', () => {
    const w = synthWindow(fanCase('static', { amp: 5, speed_rpm: 900 })); // 900 < 0.8 x 1485
    const a = assessWindow(demoConfig(), w);
    expect(a.speed.state).toBe('low');
    expect(a.zone.inhibited).toBe(true);
    expect(a.zone.notes[0]).toMatch(
      /zones and alarms held: 900 r\/min is below 1188 r\/min \(80 % of rated\)/,
    );
  });

  it('or the limits are raised by the start-up multiplier ("raise"; machinery-protection practice x2 or x3, from memory)', () => {
    const cfg = demoConfig({ watcher: { below_min_speed: 'raise', startup_multiplier: 2 } });
    // DE-V 5.3 mm/s
    const a = assessWindow(cfg, synthWindow(fanCase('static', { amp: 5, speed_rpm: 900 })));
    expect(a.zone.inhibited).toBe(false);
    expect([a.zone.limits.ab_mm_s, a.zone.limits.bc_mm_s, a.zone.limits.cd_mm_s]).toEqual([
      2.8, 5.6, 9.0,
    ]);
    expect(a.zone.channels['DE-V']!.zone).toBe('B');
    expect(a.zone.channels['DE-V']!.alarm_mm_s).toBe(5.6);
  });
});

describe('watcher config section', () => {
  it('is optional: the example config gets every default', () => {
    const w = demoConfig().watcher;
    expect(w.limits).toEqual({ source: 'iso20816' });
    expect([
      w.on_delay_s,
      w.hysteresis_share,
      w.min_speed_share,
      w.below_min_speed,
      w.window_s,
    ]).toEqual([2, 0.05, 0.8, 'inhibit', 2]);
    expect(w.unbalance.phase_tolerance_deg).toBe(30);
    expect(w.history).toEqual({ interval_s: 60, max_points: 4000 });
  });

  it('rejects a misspelt key and a bearing without radial sensors, by name', () => {
    expect(() => demoConfig({ watcher: { on_delay: 5 } })).toThrow(
      /watcher: unknown key\(s\) "on_delay"/,
    );
    const cfg = demoConfig({ watcher: { unbalance: { bearings: ['DE', 'MOTOR'] } } });
    expect(() => assessWindow(cfg, synthWindow(fanCase('static')))).toThrow(
      /watcher\.unbalance\.bearings\[1\]: bearing "MOTOR" has no vertical or horizontal sensor/,
    );
  });
});

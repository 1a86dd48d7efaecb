import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { AgentEvent } from '../agent/events.js';
import { assessWindow } from '../agent/watcher/assess.js';
import { WATCHER_EVENT_TYPES } from '../agent/watcher/events.js';
import { RULES } from '../agent/watcher/rules/index.js';
import { STATE_ROWS } from '../agent/watcher/state-table.js';
import { openWatcher } from '../agent/watcher/watcher.js';
import { FakeClock } from './support/fake-clock.js';
import { validateConfig } from '../agent/config/load.js';
import {
  DEMO_SENSORS,
  demoConfig,
  fanCase,
  synthWindow,
  type WindowSpec,
} from './support/fan-windows.js';
import { assertMatches } from './support/payload-schemas.js';

const T0 = Date.parse('2031-03-02T08:00:00Z');
const WINDOW_SAMPLES = 51200; // 10 s at 5120 Hz (test/support/fan-windows.ts)

function feeder(dir: string, watcher: Record<string, unknown> = {}) {
  const clock = new FakeClock(T0);
  const w = openWatcher(
    demoConfig({ state_dir: dir, watcher: { window_s: 10, on_delay_s: 20, ...watcher } }),
    clock,
  );
  let index = 0;
  const all: AgentEvent[] = [];
  return {
    w,
    all,
    feed(spec: WindowSpec, n = 1): AgentEvent[] {
      const out: AgentEvent[] = [];
      for (let i = 0; i < n; i++) {
        clock.advance(10);
        out.push(...w.process(synthWindow({ ...spec, start_index: index })).events);
        index += WINDOW_SAMPLES;
      }
      all.push(...out);
      return out;
    },
  };
}

describe('watcher rules as declarations', () => {
  it('every rule under agent/watcher/rules/ reports its own evidence, limits, causes and what was missing', () => {
    const a = assessWindow(demoConfig(), synthWindow(fanCase('misalignment')));
    expect(a.unbalance.rules.map((r) => r.rule)).toEqual(RULES.map((r) => r.name));
    expect(RULES.map((r) => r.name)).toEqual([
      'sensor-faults',
      'one-x-size',
      'one-x-share',
      'harmonics',
      'hv-shape',
      'bearing-phase',
      'axial',
      'phase-stability',
      'sweep-resonance',
      'significance',
    ]);
    const byName = Object.fromEntries(a.unbalance.rules.map((r) => [r.rule, r]));
    // The misalignment case (test/support/fan-windows.ts): 2x at 90 % of 1x, axial 1x 178 deg
    // apart.
    expect(byName['harmonics']!.facts.two_x_high).toBe(true);
    expect(byName['harmonics']!.points_to.map((p) => p.cause)).toEqual(['misalignment']);
    expect(byName['axial']!.evidence.join('\n')).toMatch(/178 deg apart end to end/);
    // One window only: the stability rule says what it missed, with its weight.
    expect(byName['phase-stability']!.missing).toBe(1);
    expect(byName['phase-stability']!.limits[0]).toMatch(/1x phase stability not judged: 1 window/);
    // The whole is the concatenation of the parts.
    expect(a.unbalance.evidence).toEqual(a.unbalance.rules.flatMap((r) => r.evidence));
  });

  it('a rule that stops (1x too small to judge) ends the list', () => {
    const a = assessWindow(demoConfig(), synthWindow(fanCase('quiet')));
    expect(a.unbalance.rules.map((r) => r.rule)).toEqual(['sensor-faults', 'one-x-size']);
    expect(a.unbalance.kind).toBe('none');
  });
});

describe('state table and event payloads', () => {
  it('every table row names only event types that have a payload schema', () => {
    const types = new Set<string>(WATCHER_EVENT_TYPES);
    for (const [key, row] of Object.entries(STATE_ROWS)) {
      const samples = row.value.safeParse(true).success
        ? [true, false]
        : (row.value as unknown as { options: string[] }).options;
      for (const from of [undefined, ...samples])
        for (const to of samples) {
          const e = (row.event as (f: unknown, t: unknown) => { type: string } | null)(from, to);
          if (e)
            expect(
              types.has(e.type),
              `${key}: ${String(from)} -> ${String(to)} raises ${e.type}`,
            ).toBe(true);
        }
    }
  });

  it('every event of a run through unbalance, a sensor fault, a lost tach and back matches event-watcher.v1.schema.json', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-rules-'));
    const f = feeder(dir);
    f.feed(fanCase('quiet'), 2);
    f.feed(fanCase('static'), 3);
    const spec = fanCase('static');
    f.feed({ ...spec, stats: { 'NDE-V': { dc_v: 0.3 } } }, 3);
    f.feed({ ...spec, tachEdges: 0 }, 3);
    f.feed(fanCase('couple'), 8);
    f.feed(fanCase('quiet'), 3);
    const seen = new Set(f.all.map((e) => e.type));
    for (const t of [
      'zone_changed',
      'unbalance_found',
      'sensor_not_ok',
      'sensor_ok',
      'tach_lost',
      'tach_back',
      'unbalance_cleared',
      'alarm_level_exceeded',
    ])
      expect(seen, t).toContain(t);
    for (const e of f.all) {
      assertMatches('event-watcher.v1', { schema: 'turnwise.event.v1', ...e });
      assertMatches('event.v1', { schema: 'turnwise.event.v1', ...e });
    }
    const notOk = f.all.find((e) => e.type === 'sensor_not_ok')!;
    expect(notOk['faults']).toEqual([
      { code: 'bias', words: expect.stringMatching(/bias 0\.30 V outside/) },
    ]);
  });

  it('the schema refuses a watcher event with a field of the wrong type', () => {
    const e = {
      schema: 'turnwise.event.v1',
      id: 'a/zone_changed/machine/r1/0',
      ts: '2031-03-02T08:00:00Z',
      asset: 'a',
      type: 'zone_changed',
      severity: 'info',
      window: { start_index: 0, end_index: 1 },
      scope: 'machine',
      zone: 'E',
      from_zone: null,
      limits: { ab_mm_s: 1, bc_mm_s: 2, cd_mm_s: 3, basis: 'x', multiplier: 1 },
    };
    expect(() => assertMatches('event-watcher.v1', e)).toThrow(/zone/);
    expect(() => assertMatches('event-watcher.v1', { ...e, zone: 'C' })).not.toThrow();
  });

  it('reads a v1 state.json, keeps its confirmed states (no event repeated) and writes it back as v2', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-rules-'));
    mkdirSync(join(dir, 'watcher'), { recursive: true });
    const zones = {
      'DE-V': 'C',
      'DE-H': 'C',
      'DE-A': 'A',
      'NDE-V': 'C',
      'NDE-H': 'B',
      'NDE-A': 'A',
    };
    const ok = Object.fromEntries(Object.keys(zones).map((k) => [k, true]));
    // A file as the v1 watcher wrote it (before the state table).
    const v1 = {
      version: 1,
      run: 7,
      machine_zone: 'C',
      zones,
      over_alarm: { 'DE-V': true, 'DE-H': true, 'NDE-V': true },
      unbalance: 'static',
      sensor_ok: ok,
      tach: 'ok',
      speed: 'in_range',
      vector_changed: {},
    };
    writeFileSync(join(dir, 'watcher', 'state.json'), JSON.stringify(v1));
    const f = feeder(dir);
    const first = f.feed(fanCase('static'), 3);
    // The same fan state as stored: nothing to report again, except what v1 could not know.
    expect(
      first.filter(
        (e) => e.type === 'unbalance_found' || (e.type === 'zone_changed' && !e['sensor']),
      ),
    ).toEqual([]);
    const saved = JSON.parse(readFileSync(join(dir, 'watcher', 'state.json'), 'utf8'));
    expect(saved.version).toBe(2);
    expect(saved.run).toBe(8);
    expect(saved.unbalance).toBe('static');
    // v1 had no sensor_doubt: it starts empty and is confirmed false on the fan's healthy sensors.
    expect(Object.values(saved.sensor_doubt)).toEqual([false, false, false, false, false, false]);
    expect(Object.keys(saved).sort()).toEqual(
      ['run', 'version', ...Object.keys(STATE_ROWS)].sort(),
    );
  });
});

describe('significance before a finding (watcher.unbalance.significance)', () => {
  // Group 2 rigid (config/example.yaml): A/B 1.4, B/C 2.8 mm/s r.m.s. (ISO 20816-3).
  // A static pattern of 1x 0.75 mm/s on DE-V: the synthesizer's overall
  // sqrt(1 + 0.1^2 + 0.05^2 + 0.3^2) x 0.75 = 0.79 mm/s, zone A.
  const small = { ...fanCase('static', { amp: 0.75 }) };

  it('zone A, no baseline: kind none, the residual static pattern given as information', () => {
    const a = assessWindow(demoConfig(), synthWindow(small));
    expect(a.zone.machine).toBe('A');
    expect(a.unbalance.kind).toBe('none');
    expect(a.unbalance.residual_pattern).toBe('static');
    expect(a.unbalance.evidence.join('\n')).toMatch(
      /not significant: the largest overall is 0\.79 mm\/s at DE-V, within the A\/B boundary, 1\.40 mm\/s \(ISO 20816-3 group 2, rigid support\)/,
    );
    expect(a.unbalance.evidence.join('\n')).toMatch(
      /vertical: DE and NDE 1x are 12 deg apart, in phase \(static pattern\)/,
    );
  });

  it('the same pattern grown into zone B is reported', () => {
    // 1x 1.6 mm/s: overall 1.68 mm/s, zone B.
    const a = assessWindow(demoConfig(), synthWindow(fanCase('static', { amp: 1.6 })));
    expect(a.zone.machine).toBe('B');
    expect(a.unbalance.kind).toBe('static');
    expect(a.unbalance.residual_pattern).toBeNull();
    expect(a.unbalance.evidence.join('\n')).toMatch(
      /significant: overall DE-V 1\.68 mm\/s above 1\.40 mm\/s/,
    );
  });

  it('in zone A a significant 1x change from the baseline is a finding', () => {
    const cfg = demoConfig({
      watcher: {
        baseline: { channels: { 'DE-V': { one_x_rms_mm_s: 0.1, one_x_phase_deg: 220 } } },
      },
    });
    const a = assessWindow(cfg, synthWindow(small));
    expect(a.zone.machine).toBe('A');
    // Change 0.85 mm/s >= 0.25 x B/C = 0.70 mm/s (ISO 20816-3 change criterion).
    expect(a.vector_change!['DE-V']!.significant).toBe(true);
    expect(a.unbalance.kind).toBe('static');
  });

  it("custom level: the user's own overall", () => {
    const a = assessWindow(
      demoConfig({
        watcher: { unbalance: { significance: { basis: 'custom', overall_mm_s: 0.5 } } },
      }),
      synthWindow(small),
    );
    expect(a.unbalance.kind).toBe('static');
  });

  it('the live watcher sends no unbalance_found in zone A, and one when the 1x grows into B', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-rules-'));
    const f = feeder(dir);
    expect(f.feed(small, 4).filter((e) => e.type.startsWith('unbalance'))).toEqual([]);
    expect(f.w.status().confirmed.unbalance).toBe('none');
    const grown = f
      .feed(fanCase('static', { amp: 1.6 }), 3)
      .filter((e) => e.type.startsWith('unbalance'));
    expect(grown.map((e) => `${e.type}:${e['kind']}`)).toEqual(['unbalance_found:static']);
  });
});

describe('bent shaft vs misalignment, as the trade reads them (common practice)', () => {
  // An axial sensor on the motor's drive-end bearing (M-DE), across the coupling from the fan's DE.
  const withMotor = (coupling: boolean) => {
    const base = demoConfig();
    return validateConfig(
      {
        ...base,
        sensors: [
          ...base.sensors,
          {
            id: 'M-A',
            channel: 7,
            bearing: 'M-DE',
            direction: 'axial',
            sensitivity_mv_per_g: 100,
            bias_v: { min: 8, max: 12 },
            full_scale_v: 20,
          },
        ],
        watcher: coupling ? { unbalance: { coupling: { driver: 'M-DE', driven: 'DE' } } } : {},
      },
      'test config',
    );
  };
  const sensors = [
    ...DEMO_SENSORS,
    { id: 'M-A', channel: 7, bearing: 'M-DE', direction: 'axial' as const, mounting_angle_deg: 0 },
  ];
  const mis = fanCase('misalignment');
  // fanCase misalignment: DE-A at phase 50, NDE-A at 228 (178 apart end to end), 2x at 90 % of 1x.
  const spec = (motorPhase: number): WindowSpec => ({
    ...mis,
    sensors,
    oneX: { ...mis.oneX, 'M-A': { amp: 3, phase: motorPhase } },
    orders: { ...mis.orders, 'M-A': { 2: { amp: 2.7, phase: 0 } } },
  });

  it('high 2x with axial 1x 180 apart across the coupling -> misalignment only', () => {
    const a = assessWindow(withMotor(true), synthWindow(spec(230)));
    expect(a.unbalance.points_to.map((p) => p.cause)).toEqual(['misalignment']);
    expect(a.unbalance.evidence.join('\n')).toMatch(
      /axial 1x 180 deg apart across the coupling: points to misalignment/,
    );
  });

  it('high 2x but axial in phase across the coupling, 180 apart end to end on the fan -> bent shaft', () => {
    const a = assessWindow(withMotor(true), synthWindow(spec(55)));
    expect(a.unbalance.points_to.map((p) => p.cause).sort()).toEqual([
      'bent_shaft',
      'misalignment',
    ]);
    expect(a.unbalance.points_to.find((p) => p.cause === 'bent_shaft')!.why).toMatch(
      /across the coupling the axial 1x are 5 deg apart, not opposed/,
    );
    // The 2x itself still points to misalignment (harmonics rule); the axial reading does not.
    expect(a.unbalance.points_to.find((p) => p.cause === 'misalignment')!.why).not.toMatch(/axial/);
  });

  it('without watcher.unbalance.coupling the motor sensor is not used for it, and the rule says so', () => {
    const a = assessWindow(withMotor(false), synthWindow(spec(230)));
    expect(a.unbalance.limits.join('\n')).toMatch(/no sensor on the driver side of the coupling/);
  });

  it('a coupling bearing without an axial sensor is refused with its path', () => {
    const base = demoConfig();
    const cfg = validateConfig(
      { ...base, watcher: { unbalance: { coupling: { driver: 'M-DE', driven: 'DE' } } } },
      'test config',
    );
    expect(() => assessWindow(cfg, synthWindow(mis))).toThrow(
      /watcher\.unbalance\.coupling\.driver.*bearing "M-DE" has no axial sensor/s,
    );
  });
});

import {
  appendFileSync,
  existsSync,
  mkdirSync,
  mkdtempSync,
  readdirSync,
  readFileSync,
  rmSync,
  writeFileSync,
} from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { WindowResult } from '../agent/dsp/types.js';
import type { AgentEvent } from '../agent/events.js';
import { UserError } from '../agent/errors.js';
import { MemoryLogger, silentLogger, type Logger } from '../agent/log.js';
import { FileHistoryStore, History, type HistoryPoint } from '../agent/watcher/history.js';
import { openWatcher, type Watcher } from '../agent/watcher/watcher.js';
import { FakeClock } from './support/fake-clock.js';
import {
  demoConfig,
  fanCase,
  synthWindow,
  type FanCase,
  type WindowSpec,
} from './support/fan-windows.js';
import { fillUp, tryMountTmpfs, unmountTmpfs } from './support/tmpfs.js';

const T0 = Date.parse('2031-03-02T08:00:00Z');
const WINDOW_SAMPLES = 51200; // 10 s at 5120 Hz, as the synthesizer builds them

function tmp(): string {
  return mkdtempSync(join(tmpdir(), 'tw-watch-'));
}

/** Feeds windows one after another on a continuous sample clock, 10 s of wall clock apiece. */
class Feeder {
  private index = 0;
  readonly events: AgentEvent[] = [];
  constructor(
    readonly w: Watcher,
    readonly clock: FakeClock,
    index = 0,
  ) {
    this.index = index;
  }
  feed(spec: WindowSpec, n = 1): AgentEvent[] {
    const out: AgentEvent[] = [];
    for (let i = 0; i < n; i++) {
      const win: WindowResult = synthWindow({ ...spec, start_index: this.index });
      this.index += WINDOW_SAMPLES;
      this.clock.advance(10);
      out.push(...this.w.process(win).events);
    }
    this.events.push(...out);
    return out;
  }
  case(c: FanCase, n = 1, opts: { amp?: number; phase?: number } = {}): AgentEvent[] {
    return this.feed(fanCase(c, opts), n);
  }
}

/**
 * These tests feed 10 s windows with a 20 s on-delay (a state is reported on its second window).
 */
function start(
  dir: string,
  watcher: Record<string, unknown> = {},
  ms = T0,
  log: Logger = silentLogger,
): Feeder {
  const clock = new FakeClock(ms);
  return new Feeder(
    openWatcher(
      demoConfig({ state_dir: dir, watcher: { window_s: 10, on_delay_s: 20, ...watcher } }),
      clock,
      log,
    ),
    clock,
  );
}

const types = (es: readonly AgentEvent[]): string[] =>
  es.map((e) => `${e.type}:${(e['sensor'] as string | undefined) ?? 'machine'}`);

describe('watcher events over time', () => {
  it('a quiet fan that goes out of balance: zone, alarm and unbalance events with stable, unique ids', () => {
    const dir = tmp();
    const f = start(dir);
    // On-delay 20 s with 10 s windows: a state is reported on its second window.
    expect(f.case('quiet')).toEqual([]);
    const first = f.case('quiet');
    expect(types(first).sort()).toEqual([
      'zone_changed:DE-A',
      'zone_changed:DE-H',
      'zone_changed:DE-V',
      'zone_changed:NDE-A',
      'zone_changed:NDE-H',
      'zone_changed:NDE-V',
      'zone_changed:machine',
    ]);
    const machineA = first.find((e) => e['scope'] === 'machine')!;
    expect(machineA).toMatchObject({
      zone: 'A',
      from_zone: null,
      severity: 'info',
      asset: 'kessrow-id3a',
      ts: '2031-03-02T08:00:20.000Z',
    });
    expect(machineA.id).toBe('kessrow-id3a/zone_changed/machine/r1/51200');
    expect(f.case('quiet', 3)).toEqual([]);

    expect(f.case('static')).toEqual([]); // one window is not enough
    const bad = f.case('static');
    const machineC = bad.find((e) => e.type === 'zone_changed' && e['scope'] === 'machine')!;
    expect(machineC).toMatchObject({ zone: 'C', from_zone: 'A', severity: 'warning' });
    const found = bad.find((e) => e.type === 'unbalance_found')!;
    expect(found).toMatchObject({ kind: 'static', severity: 'warning' });
    expect((found['evidence'] as string[]).join('\n')).toMatch(/in phase \(static pattern\)/);
    // No baseline: the alarm sits at B/C (2.8 mm/s, ISO 20816-3 group 2 rigid); DE-V at 4.2 mm/s is
    // over it.
    expect(bad.filter((e) => e.type === 'alarm_level_exceeded').map((e) => e['sensor'])).toContain(
      'DE-V',
    );
    expect(f.case('static', 3)).toEqual([]); // steady: nothing more to say

    const ids = f.events.map((e) => e.id);
    expect(new Set(ids).size).toBe(ids.length);
    for (const e of f.events) expect(e.ts).toMatch(/^2031-03-02T08:0\d:\d0\.000Z$/);

    // The same inputs from a fresh state directory give the same ids (stable if sent again).
    const g = start(tmp());
    g.case('quiet', 5);
    g.case('static', 5);
    expect(g.events.map((e) => e.id)).toEqual(ids);
  });

  it('zone does not chatter when the overall hovers at a boundary (hysteresis 5 %, on-delay 20 s)', () => {
    // DE-V overall alternates 2.73 / 2.83 mm/s around B/C = 2.8 (ISO 20816-3 group 2 rigid).
    const amps = [2.6, 2.6, 2.7, 2.6, 2.7, 2.6, 2.7, 2.6, 2.7, 2.6];
    const zonesOf = (watcher: Record<string, unknown>): unknown[] => {
      const f = start(tmp(), watcher);
      for (const a of amps) f.case('static', 1, { amp: a });
      return f.events
        .filter((e) => e.type === 'zone_changed' && e['sensor'] === 'DE-V')
        .map((e) => e['zone']);
    };
    // Once over B/C it stays C until 5 % below (2.66 mm/s): one rise, no flapping.
    expect(zonesOf({})).toEqual(['B', 'C']);
    // Without hysteresis and on-delay the same readings flap at every window.
    expect(zonesOf({ hysteresis_share: 0, on_delay_s: 0 })).toEqual([
      'B',
      'C',
      'B',
      'C',
      'B',
      'C',
      'B',
      'C',
      'B',
    ]);
  });

  it('a sensor fault during unbalance: reported itself, and the verdict does not move', () => {
    const f = start(tmp());
    f.case('static', 4);
    const spec = fanCase('static');
    const broken: WindowSpec = {
      ...spec,
      oneX: { ...spec.oneX, 'NDE-V': { amp: 6, phase: 220 } },
      stats: { 'NDE-V': { dc_v: 0.3 } },
    };
    const during = f.feed(broken, 4);
    expect(types(during)).toEqual(['sensor_not_ok:NDE-V']);
    expect((during[0]!['problems'] as string[])[0]).toMatch(
      /bias 0\.30 V outside its 8-12 V window/,
    );
    expect(f.w.status().latest!.unbalance.kind).toBe('static');
    const after = f.case('static', 2);
    expect(types(after)).toEqual(['sensor_ok:NDE-V']);
  });

  it('tach lost and back; no "unbalance cleared" while there is no phase reference', () => {
    const f = start(tmp());
    f.case('static', 3);
    const lost = f.feed({ ...fanCase('static'), tachEdges: 0 }, 3);
    expect(types(lost)).toEqual(['tach_lost:machine']);
    expect(lost[0]!['why']).toMatch(/no usable revolutions/);
    const back = f.case('static', 2);
    expect(types(back)).toEqual(['tach_back:machine']);
    expect(f.events.some((e) => e.type === 'unbalance_cleared')).toBe(false);
  });

  it('speed out of range and back', () => {
    const f = start(tmp());
    f.case('static', 2);
    const high = f.feed(fanCase('static', { speed_rpm: 1700 }), 2); // above 1.1 x 1485
    expect(types(high)).toContain('speed_out_of_range:machine');
    expect(high.find((e) => e.type === 'speed_out_of_range')!['speed_rpm']).toBe(1700);
    expect(types(f.case('static', 2))).toContain('speed_in_range:machine');
    // 1700 r/min is no multiple of rated: no word about tach.pulses_per_rev.
    expect(String(high.find((e) => e.type === 'speed_out_of_range')!['why'])).not.toMatch(
      /pulses_per_rev/,
    );
  });

  it('speed steady at twice rated: the speed event says tach.pulses_per_rev is probably wrong', () => {
    const f = start(tmp());
    f.case('static', 2);
    const twice = f.feed(fanCase('static', { speed_rpm: 2 * 1485 }), 2);
    const e = twice.find((x) => x.type === 'speed_out_of_range')!;
    expect(String(e['why'])).toMatch(
      /above .* % of rated\); 2970 r\/min is about 2 x machine\.rated_rpm \(1485\): tach\.pulses_per_rev is probably wrong.*set tach\.pulses_per_rev: 2/,
    );
  });

  it('unbalance kind change and clearing after a balance job', () => {
    const f = start(tmp());
    f.case('static', 3);
    const kinds = f.case('couple', 3);
    expect(kinds.find((e) => e.type === 'unbalance_kind_changed')).toMatchObject({
      kind: 'couple',
      from_kind: 'static',
    });
    const cleared = f.case('quiet', 3);
    expect(cleared.find((e) => e.type === 'unbalance_cleared')).toMatchObject({
      kind: 'none',
      from_kind: 'couple',
      severity: 'info',
    });
  });
});

describe('baseline, vector change and restarts on real files', () => {
  it('learns a baseline, then reports a phase swing at constant amplitude as a vector change', () => {
    const dir = tmp();
    const f = start(dir);
    f.w.startLearning();
    f.case('static', 4, { amp: 2, phase: 40 });
    const { baseline, left_out } = f.w.stopLearning();
    expect(left_out).toEqual([]);
    expect(baseline.channels['DE-V']!.one_x_rms_mm_s).toBeCloseTo(2, 9);
    expect(baseline.channels['DE-V']!.one_x_phase_deg).toBeCloseTo(40, 9);
    expect(existsSync(join(dir, 'watcher', 'baseline.json'))).toBe(true);

    // Same amplitude, phase moved 60 deg: |V - Vb| = 2 x 2 x sin(30 deg) = 2.0 mm/s (chord of a
    // circle), above the default 0.25 x B/C = 0.7 mm/s (ISO 20816-3: a change of 25 % of B/C is
    // significant).
    const swing = f.case('static', 2, { amp: 2, phase: 100 });
    const de = swing.find((e) => e.type === 'vector_change' && e['sensor'] === 'DE-V')!;
    expect(de['delta_mm_s'] as number).toBeCloseTo(2.0, 9);
    expect(de['amp_change_mm_s'] as number).toBeCloseTo(0, 9);
    expect(de['phase_change_deg'] as number).toBeCloseTo(60, 9);
    expect(de['limit_mm_s']).toBeCloseTo(0.7, 12);
    // amplitude, and so zone, unchanged
    expect(swing.some((e) => e.type === 'zone_changed' && e['from_zone'] !== null)).toBe(false);
  });

  it('refuses to learn from a fan whose 1x phase wanders, and says why', () => {
    const f = start(tmp());
    f.w.startLearning();
    for (const p of [0, 90, 180, 270]) f.case('static', 1, { phase: p });
    expect(() => f.w.stopLearning()).toThrow(UserError);
  });

  it('a restart neither repeats events nor loses baseline and history', () => {
    const dir = tmp();
    const watcherCfg = { history: { interval_s: 60 } };
    const f = start(dir, watcherCfg);
    f.w.startLearning();
    f.case('static', 4, { amp: 2 });
    f.w.stopLearning();
    f.case('static', 20, { amp: 3 });
    expect(f.events.length).toBeGreaterThan(0);
    const points = f.w.status().trend!.channels['DE-V']!.overall.points;
    expect(points).toBeGreaterThanOrEqual(3);
    const state = JSON.parse(readFileSync(join(dir, 'watcher', 'state.json'), 'utf8'));
    expect(state.run).toBe(1);
    expect(state.machine_zone).toBe('C');

    // Restart: a new process on the same state directory, the sample clock starting again at 0.
    const g = start(dir, watcherCfg, f.clock.now() + 60_000);
    expect(g.w.baseline!.source).toBe('learned');
    expect(g.w.status().trend!.channels['DE-V']!.overall.points).toBe(points);
    const again = g.case('static', 6, { amp: 3 });
    expect(again).toEqual([]); // same states as before the restart: nothing new to report
    expect(JSON.parse(readFileSync(join(dir, 'watcher', 'state.json'), 'utf8')).run).toBe(2);
    const next = g.case('quiet', 3);
    expect(next.every((e) => e.id.includes('/r2/'))).toBe(true);
    expect(next.length).toBeGreaterThan(0);
  });
});

/** Log lines about one save problem (the burst logger puts its key in `problem`). */
function problemLines(
  log: MemoryLogger,
  key: string,
  level: 'warn' | 'info',
): MemoryLogger['lines'] {
  return log.lines.filter((l) => l.level === level && l.fields['problem'] === key);
}

describe('disk trouble', () => {
  it('logs a failing save once per burst, lists it while it lasts, and clears it with an info line once saving works again', () => {
    const dir = tmp();
    const log = new MemoryLogger();
    const f = start(dir, { history: { interval_s: 10 } }, T0, log);
    f.case('quiet', 2);
    // A directory where each file should be: every save fails (EISDIR), as on a broken disk; no
    // root needed.
    const w = join(dir, 'watcher');
    for (const name of ['state.json', 'history.jsonl']) {
      rmSync(join(w, name));
      mkdirSync(join(w, name));
    }
    const events = f.case('static', 6);
    expect(events.some((e) => e.type === 'unbalance_found')).toBe(true);
    const warnings = f.w.status().warnings.join('\n');
    expect(warnings).toMatch(/confirmed states not saved: .*EISDIR/);
    expect(warnings).toMatch(/history not saved: .*EISDIR/);
    // Tried on every window (state) and every history point, written once.
    expect(problemLines(log, 'confirmed states not saved', 'warn')).toHaveLength(1);
    expect(problemLines(log, 'history not saved', 'warn')).toHaveLength(1);

    for (const name of ['state.json', 'history.jsonl']) rmSync(join(w, name), { recursive: true });
    f.case('static');
    expect(f.w.status().warnings).toEqual([]);
    // The states were confirmed on the second static window (20 s on-delay): 5 failed saves, then
    // the 6th worked.
    expect(problemLines(log, 'confirmed states not saved', 'info')).toEqual([
      expect.objectContaining({
        msg: 'confirmed states saved again',
        fields: expect.objectContaining({ occurrences: 5 }),
      }),
    ]);
    // One point per 10 s window after the first: 6 failed appends; the points kept in memory are
    // saved late.
    expect(problemLines(log, 'history not saved', 'info')).toEqual([
      expect.objectContaining({ fields: expect.objectContaining({ occurrences: 6 }) }),
    ]);
    expect(new FileHistoryStore(dir).load().points).toHaveLength(2 + 6 + 1 - 1);
    expect(log.lines.filter((l) => l.level === 'warn')).toHaveLength(2);
    // What was saved after the recovery is complete: a restart repeats nothing.
    const g = start(dir, { history: { interval_s: 10 } }, f.clock.now() + 10_000);
    expect(g.case('static', 3)).toEqual([]);
  });

  it('starts on a full state directory (a real 64 KiB tmpfs), keeps producing events, and saves once space is freed (needs root to mount)', (ctx) => {
    const mnt = tryMountTmpfs();
    if (!mnt)
      return ctx.skip(
        'cannot mount a tmpfs here (not root or no CAP_SYS_ADMIN); ' +
          'the EISDIR test above covers the same path',
      );
    try {
      const dir = join(mnt, 'state');
      mkdirSync(join(dir, 'watcher'), { recursive: true });
      const { code, ballast } = fillUp(mnt);
      expect(code).toBe('ENOSPC');
      const log = new MemoryLogger();
      const f = start(dir, { history: { interval_s: 10 } }, T0, log); // used to throw ENOSPC here
      expect(f.w.status().warnings).toEqual([
        expect.stringMatching(/^confirmed states not saved: ENOSPC/),
      ]);
      f.case('quiet', 2);
      f.case('static', 4);
      expect(types(f.events)).toContain('zone_changed:machine');
      expect(types(f.events)).toContain('unbalance_found:machine');
      // The start counter could not be saved: this run counts from the clock's seconds, so a
      // restart that reads the old counter again cannot repeat these event ids.
      const run = Math.floor(T0 / 1000);
      expect(f.events.every((e) => e.id.includes(`/r${run}/`))).toBe(true);
      expect(problemLines(log, 'confirmed states not saved', 'warn')).toHaveLength(1);
      expect(problemLines(log, 'history not saved', 'warn')).toHaveLength(1);
      // nothing half-written left
      expect(readdirSync(join(dir, 'watcher')).filter((n) => n.includes('.tmp-'))).toEqual([]);
      expect(existsSync(join(dir, 'watcher', 'state.json'))).toBe(false);

      rmSync(ballast);
      f.case('static');
      expect(f.w.status().warnings).toEqual([]);
      const state = JSON.parse(readFileSync(join(dir, 'watcher', 'state.json'), 'utf8'));
      expect(state).toMatchObject({ run, machine_zone: 'C', unbalance: 'static' });
      expect(new FileHistoryStore(dir).load()).toMatchObject({
        points: { length: 2 + 4 + 1 - 1 },
        warnings: [],
      });
      const g = start(dir, { history: { interval_s: 10 } }, f.clock.now() + 10_000);
      expect(g.case('static', 3)).toEqual([]);
      expect(g.case('quiet', 3).every((e) => e.id.includes(`/r${run + 1}/`))).toBe(true);
    } finally {
      unmountTmpfs(mnt);
    }
  });

  it('moves a damaged state.json aside, starts afresh and says so in the log, the status and an event', () => {
    const dir = tmp();
    const f = start(dir);
    f.case('static', 4);
    const file = join(dir, 'watcher', 'state.json');
    const torn = '{"version":1,"run":1,"machine_zone":"C","zo';
    writeFileSync(file, torn);
    const log = new MemoryLogger();
    const t1 = f.clock.now() + 60_000;
    const g = start(dir, {}, t1, log); // used to stop with a UserError (exit 2)
    const qdir = join(dir, 'watcher', 'quarantine');
    const movedTo = join(qdir, `state.json.${new Date(t1).toISOString().replace(/[:.]/g, '-')}`);
    expect(readdirSync(qdir)).toEqual([movedTo.slice(qdir.length + 1)]);
    expect(readFileSync(movedTo, 'utf8')).toBe(torn);
    const said = log.lines.filter((l) => l.level === 'warn');
    expect(said).toHaveLength(1);
    expect(said[0]!.msg).toMatch(
      /state\.json is damaged \(not valid JSON .*\); moved to .*quarantine\/state\.json\.\S+ for inspection; the watcher starts afresh/,
    );
    expect(g.w.status().warnings).toEqual([said[0]!.msg]);

    const first = g.case('static', 2);
    const q = first.filter((e) => e.type === 'state_files_quarantined');
    expect(q).toEqual([
      expect.objectContaining({
        severity: 'warning',
        files: [{ file, moved_to: movedTo, problem: expect.stringMatching(/^not valid JSON/) }],
      }),
    ]);
    // The states are reported again, under a start counter from the clock (the stored one was
    // lost).
    expect(types(first)).toContain('unbalance_found:machine');
    const run = Math.floor(t1 / 1000);
    expect(first.every((e) => e.id.includes(`/r${run}/`))).toBe(true);
    expect(JSON.parse(readFileSync(file, 'utf8'))).toMatchObject({ run, unbalance: 'static' });
    g.case('static', 3);
    // said once, not per window
    expect(log.lines.filter((l) => l.level === 'warn')).toHaveLength(1);
  });

  it('moves a damaged baseline aside and watches on without it', () => {
    const dir = tmp();
    const f = start(dir);
    f.w.startLearning();
    f.case('static', 4);
    f.w.stopLearning();
    const file = join(dir, 'watcher', 'baseline.json');
    writeFileSync(
      file,
      JSON.stringify({ version: 1, asset: 'kessrow-id3a', channels: 'overwritten' }),
    );
    const log = new MemoryLogger();
    const g = start(dir, {}, f.clock.now() + 60_000, log); // used to stop with a UserError (exit 2)
    expect(g.w.baseline).toBeNull();
    expect(existsSync(file)).toBe(false);
    expect(readdirSync(join(dir, 'watcher', 'quarantine'))).toEqual([
      expect.stringMatching(/^baseline\.json\.\d{4}-\d\d-\d\dT\d\d-\d\d-\d\d-\d{3}Z$/),
    ]);
    expect(g.w.status().warnings).toEqual([
      expect.stringMatching(
        /baseline\.json is damaged \(unexpected contents[\s\S]*moved to [\s\S]*learn it again/,
      ),
    ]);
    const events = g.case('quiet', 3);
    expect(events.filter((e) => e.type === 'state_files_quarantined')).toHaveLength(1);
    expect(types(events)).toContain('zone_changed:machine');
    // The state file was fine: the start counter simply goes on.
    expect(events.every((e) => e.id.includes('/r2/'))).toBe(true);
  });

  it('moves a history file that cannot be read at all aside; a torn line is said once, not per window', () => {
    const dir = tmp();
    const f = start(dir, { history: { interval_s: 10 } });
    f.case('quiet', 3);
    const file = join(dir, 'watcher', 'history.jsonl');
    appendFileSync(file, '{"ts":"2031-03-02T08:0');
    const log = new MemoryLogger();
    const g = start(dir, { history: { interval_s: 10 } }, f.clock.now() + 10_000, log);
    g.case('quiet', 5);
    expect(log.lines.filter((l) => l.level === 'warn').map((l) => l.msg)).toEqual([
      expect.stringMatching(/line 3 is not valid JSON \(torn write after a power cut\?\), skipped/),
    ]);
    expect(new FileHistoryStore(dir).load()).toMatchObject({
      points: { length: 2 + 4 },
      warnings: [],
    }); // repaired

    rmSync(file);
    mkdirSync(file); // read fails with EISDIR
    const h = start(dir, { history: { interval_s: 10 } }, g.clock.now() + 10_000);
    expect(h.w.status().warnings).toEqual([
      expect.stringMatching(
        /history\.jsonl is damaged \(cannot be read \(EISDIR\)\); moved to .* the history starts afresh/,
      ),
    ]);
    h.case('quiet', 3);
    expect(new FileHistoryStore(dir).load().points).toHaveLength(2);
  });

  it("refuses a state directory that holds another fan's baseline", () => {
    const dir = tmp();
    const f = start(dir);
    f.w.startLearning();
    f.case('static', 4);
    f.w.stopLearning();
    const other = demoConfig({ state_dir: dir, machine: { id: 'other-fan' } });
    expect(() => openWatcher(other, new FakeClock(T0))).toThrow(
      /state_dir: the stored baseline belongs to asset "kessrow-id3a", this config is for "other-fan"/,
    );
  });
});

describe('history bounds and trend', () => {
  function point(ms: number, overall: number): HistoryPoint {
    return {
      ts: new Date(ms).toISOString(),
      windows: 6,
      speed_rpm: 1485,
      channels: {
        'DE-V': { overall_rms_mm_s: overall, one_x_rms_mm_s: overall * 0.9, one_x_phase_deg: 40 },
      },
    };
  }

  it('stays within max_points by merging old points, keeping the oldest time covered, and survives a reload', () => {
    const dir = tmp();
    const h = new History(new FileHistoryStore(dir), 100);
    for (let i = 0; i < 250; i++) h.add(point(T0 + i * 60_000, 1 + i / 1000));
    expect(h.points.length).toBeLessThanOrEqual(100);
    const lines = readFileSync(join(dir, 'watcher', 'history.jsonl'), 'utf8')
      .trim()
      .split('\n');
    expect(lines.length).toBe(h.points.length);
    // The newest 50 points are kept as they were; the oldest surviving point averages the first
    // minutes.
    expect(h.points[h.points.length - 1]!.ts).toBe(new Date(T0 + 249 * 60_000).toISOString());
    expect(Date.parse(h.points[0]!.ts) - T0).toBeLessThan(30 * 60_000);
    // no window lost, only merged
    expect(h.points.reduce((a, p) => a + p.windows, 0)).toBe(250 * 6);
    const again = new History(new FileHistoryStore(dir), 100);
    expect(again.points).toEqual(h.points);
  });

  it('skips a torn last line after a power cut and repairs the file', () => {
    const dir = tmp();
    const h = new History(new FileHistoryStore(dir), 100);
    h.add(point(T0, 1));
    h.add(point(T0 + 60_000, 1.1));
    appendFileSync(join(dir, 'watcher', 'history.jsonl'), '{"ts":"2031-03-02T08:02:00.000Z","wind');
    const again = new History(new FileHistoryStore(dir), 100);
    expect(again.points.length).toBe(2);
    expect(again.warnings[0]).toMatch(
      /line 3 is not valid JSON \(torn write after a power cut\?\), skipped/,
    );
    again.add(point(T0 + 120_000, 1.2));
    expect(new History(new FileHistoryStore(dir), 100).points.length).toBe(3);
  });
});

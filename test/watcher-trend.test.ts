import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { HistoryPoint } from '../agent/watcher/history.js';
import { resolveWatcherSettings } from '../agent/watcher/settings.js';
import { seriesTrend, theilSen, trendReport, type NamedLimit } from '../agent/watcher/trend.js';
import { openWatcher } from '../agent/watcher/watcher.js';
import { FakeClock } from './support/fake-clock.js';
import { demoConfig, fanCase, synthWindow } from './support/fan-windows.js';

const T0 = Date.parse('2031-03-02T08:00:00Z');
const H = 3600_000;
// ISO 20816-3 group 2, rigid: A/B 1.4, B/C 2.8, C/D 4.5 mm/s.
const LIMITS: NamedLimit[] = [
  { name: 'zone A/B', value_mm_s: 1.4 },
  { name: 'zone B/C', value_mm_s: 2.8 },
  { name: 'zone C/D', value_mm_s: 4.5 },
];
const CFG = { min_points: 12, min_span_s: 3600, span_s: 30 * 86400, max_points: 200, min_r2: 0.5 };

/** Deterministic pseudo-random numbers in [-1, 1) (a linear congruential generator). */
function noise(seed: number): () => number {
  let x = seed;
  return () => {
    x = (Math.imul(x, 1664525) + 1013904223) >>> 0;
    return x / 2 ** 31 - 1;
  };
}

describe('robust trend (Theil-Sen) and the next boundary crossing', () => {
  it('recovers slope and intercept of an exact line', () => {
    const t = [0, 1, 2, 3, 4, 5, 6, 7];
    const fit = theilSen(
      t,
      t.map((x) => 3 - 0.5 * x),
    )!;
    expect(fit.slope).toBe(-0.5);
    expect(fit.intercept).toBe(3);
    expect(fit.r2).toBe(1);
  });

  it('ignores a few wild points that would drag a least-squares line', () => {
    const t = Array.from({ length: 20 }, (_, i) => i);
    const y = t.map((x) => 1 + 0.1 * x);
    y[3] = 40; // a knock on the sensor
    y[15] = -30;
    expect(theilSen(t, y)!.slope).toBeCloseTo(0.1, 9);
  });

  it('a synthetic linear rise of 0.02 mm/s per hour from 1.5 mm/s crosses B/C = 2.8 mm/s about 18 h after the last point', () => {
    const rnd = noise(7);
    const tMs = Array.from({ length: 48 }, (_, i) => T0 + i * H);
    const y = tMs.map((_, i) => 1.5 + 0.02 * i + 0.01 * rnd());
    const tr = seriesTrend(tMs, y, LIMITS, CFG);
    expect(tr.state).toBe('rising');
    expect(tr.slope_mm_s_per_day!).toBeCloseTo(0.48, 2);
    // By hand: at the last point (47 h) the line is at 1.5 + 0.02 x 47 = 2.44 mm/s;
    // (2.8 - 2.44) / 0.02 = 18 h later.
    expect(tr.fitted_now_mm_s!).toBeCloseTo(2.44, 2);
    expect(tr.next_limit).toEqual({ name: 'zone B/C', value_mm_s: 2.8 });
    const expected = T0 + (47 + 18) * H;
    expect(Math.abs(Date.parse(tr.crossing_at!) - expected)).toBeLessThan(0.5 * H);
    const [early, late] = tr.crossing_range!.map((s) => Date.parse(s));
    expect(early!).toBeLessThanOrEqual(Date.parse(tr.crossing_at!));
    expect(late!).toBeGreaterThanOrEqual(Date.parse(tr.crossing_at!));
    expect(tr.why).toMatch(
      /rising 0\.4[78]\d mm\/s per day .* reaches zone B\/C \(2\.80 mm\/s\) about 2031-03-05T01:/,
    );
  });

  it('says "no trend" for scatter about a constant level', () => {
    const rnd = noise(11);
    const tMs = Array.from({ length: 60 }, (_, i) => T0 + i * H);
    const tr = seriesTrend(
      tMs,
      tMs.map(() => 2 + 0.3 * rnd()),
      LIMITS,
      CFG,
    );
    expect(tr.state).toBe('no_trend');
    expect(tr.crossing_at).toBeNull();
    expect(tr.why).toMatch(/includes zero/);
  });

  it('says "no trend" when a real but small slope explains too little of the scatter', () => {
    const rnd = noise(5);
    const tMs = Array.from({ length: 400 }, (_, i) => T0 + i * H);
    const tr = seriesTrend(
      tMs,
      tMs.map((_, i) => 2 + 0.0005 * i + 0.3 * rnd()),
      LIMITS,
      CFG,
    );
    expect(tr.state).toBe('no_trend');
    expect(tr.slope_range_mm_s_per_day![0]).toBeGreaterThan(0); // the slope itself is clear...
    // ...but the fit is poor
    expect(tr.why).toMatch(/the line explains only \d+ % of the variation/);
  });

  it('needs enough points over enough time before saying anything', () => {
    const tMs = [0, 1, 2, 3, 4].map((i) => T0 + i * H);
    const tr = seriesTrend(tMs, [1, 1.1, 1.2, 1.3, 1.4], LIMITS, CFG);
    expect(tr.state).toBe('too_little_data');
    expect(tr.why).toBe('5 point(s) over 4.0 h; a trend needs at least 12 points over 1.0 h');
  });

  it('leaves out history from before the baseline was learned (an earlier balance state)', () => {
    const cfg = demoConfig();
    const s = resolveWatcherSettings(cfg);
    const pt = (h: number, v: number): HistoryPoint => ({
      ts: new Date(T0 + h * H).toISOString(),
      windows: 6,
      speed_rpm: 1485,
      channels: { 'DE-V': { overall_rms_mm_s: v, one_x_rms_mm_s: v, one_x_phase_deg: 40 } },
    });
    // 24 h at 3.5 mm/s, a balancing job and a new baseline, then 24 h rising 0.02 mm/s per hour
    // from 1.0 mm/s.
    const pts = [
      ...Array.from({ length: 24 }, (_, h) => pt(h, 3.5)),
      ...Array.from({ length: 24 }, (_, h) => pt(30 + h, 1.0 + 0.02 * h)),
    ];
    const base = {
      version: 1 as const,
      asset: s.asset,
      source: 'learned' as const,
      learned_at: new Date(T0 + 29 * H).toISOString(),
      windows: 6,
      speed_rpm: 1485,
      channels: {},
    };
    // the step of the job hides the rise
    expect(trendReport(s, pts, null).channels['DE-V']!.overall.state).not.toBe('rising');
    const after = trendReport(s, pts, base).channels['DE-V']!.overall;
    expect(after.points).toBe(24);
    expect(after.state).toBe('rising');
    // Last point 1.0 + 0.02 x 23 = 1.46 mm/s, past A/B 1.4; B/C 2.8 is (2.8 - 1.46) / 0.02 = 67 h
    // later (ISO 20816-3 group 2 rigid).
    expect(after.next_limit!.name).toBe('zone B/C');
    expect(Date.parse(after.crossing_at!)).toBeCloseTo(T0 + (53 + 67) * H, -4);
  });

  it('the live watcher keeps history points and forecasts the crossing for a fan whose unbalance grows', () => {
    const clock = new FakeClock(T0);
    const cfg = demoConfig({
      state_dir: mkdtempSync(join(tmpdir(), 'tw-trend-')),
      watcher: { history: { interval_s: 60 }, trend: { min_points: 6, min_span_s: 300 } },
    });
    const w = openWatcher(cfg, clock);
    for (let i = 0; i < 90; i++) {
      clock.advance(10);
      w.process(
        synthWindow({ ...fanCase('static', { amp: 1.0 + 0.01 * i }), start_index: i * 51200 }),
      );
    }
    const t = w.status().trend!;
    // Windows at 10 s ... 900 s: the first point closes at 70 s (first window + 60 s), then one
    // every 60 s up to 850 s.
    expect(t.channels['DE-V']!.overall.points).toBe(14);
    const de = t.channels['DE-V']!.overall;
    expect(de.state).toBe('rising');
    expect(de.next_limit!.name).toBe('zone B/C'); // DE-V is already in zone B
    expect(Date.parse(de.crossing_at!)).toBeGreaterThan(clock.now());
    // The soonest crossing over all sensors is reported for the machine.
    const all = Object.entries(t.channels).flatMap(([id, c]) =>
      [c.overall, c.one_x].flatMap((x) => (x.crossing_at ? [{ id, at: x.crossing_at }] : [])),
    );
    const first = all.reduce((a, b) => (b.at < a.at ? b : a));
    expect(t.soonest!.crossing_at).toBe(first.at);
    expect(t.soonest!.sensor).toBe(first.id);
  });
});

/**
 * Watcher cost per window and per history point, to size the board. Run after a build:
 *   node --expose-gc dist/test/bench/watcher.bench.js
 * Prints one line per measurement (mean over the repetitions).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { assessWindow } from '../../agent/watcher/assess.js';
import { decimate, type HistoryPoint } from '../../agent/watcher/history.js';
import { resolveWatcherSettings } from '../../agent/watcher/settings.js';
import { seriesTrend, trendReport } from '../../agent/watcher/trend.js';
import { openWatcher } from '../../agent/watcher/watcher.js';
import { FakeClock } from '../support/fake-clock.js';
import { demoConfig, fanCase, synthWindow } from '../support/fan-windows.js';

function measure(label: string, reps: number, fn: (i: number) => void): void {
  (globalThis as { gc?: () => void }).gc?.();
  const t0 = process.hrtime.bigint();
  for (let i = 0; i < reps; i++) fn(i);
  const us = Number(process.hrtime.bigint() - t0) / 1000 / reps;
  process.stdout.write(
    `${label.padEnd(58)} ` +
      `${us >= 1000 ? `${(us / 1000).toFixed(2)} ms` : `${us.toFixed(1)} us`} per ` +
      `call (${reps} calls)\n`,
  );
}

const dir = mkdtempSync(join(tmpdir(), 'tw-bench-'));
try {
  const cfg = demoConfig({ state_dir: dir, watcher: { history: { interval_s: 60 } } });
  const windows = Array.from({ length: 600 }, (_, i) =>
    synthWindow({
      ...fanCase(i % 200 < 100 ? 'static' : 'dynamic', { phase: 40 + (i % 5) }),
      start_index: i * 51200,
    }),
  );
  measure('assessWindow (6 sensors, 5 recent windows)', 2000, (i) => {
    assessWindow(cfg, windows[i % 600]!, { recent: windows.slice(0, 5), baseline: null });
  });
  const clock = new FakeClock(Date.parse('2031-03-02T08:00:00Z'));
  const w = openWatcher(cfg, clock);
  measure('Watcher.process (10 s windows, fsynced point every 60 s)', 600, (i) => {
    clock.advance(10);
    w.process(windows[i]!);
  });

  const s = resolveWatcherSettings(cfg);
  const t0 = Date.parse('2031-03-02T08:00:00Z');
  const pts: HistoryPoint[] = Array.from({ length: 4000 }, (_, i) => ({
    ts: new Date(t0 + i * 60_000).toISOString(),
    windows: 6,
    speed_rpm: 1485,
    channels: Object.fromEntries(
      s.sensors.map((x) => [
        x.id,
        {
          overall_rms_mm_s: 2 + i * 1e-4 + 0.05 * Math.sin(i),
          one_x_rms_mm_s: 1.8 + i * 1e-4,
          one_x_phase_deg: 40,
        },
      ]),
    ),
  }));
  const tMs = pts.map((p) => Date.parse(p.ts));
  const ys = pts.map((p) => p.channels['DE-V']!.overall_rms_mm_s);
  const lim = [{ name: 'zone B/C', value_mm_s: 2.8 }];
  measure('seriesTrend, 4000 points binned to 200 (19 900 slopes)', 50, () => {
    seriesTrend(tMs, ys, lim, s.w.trend);
  });
  measure('trendReport, 6 sensors x 2 series x 4000 points', 10, () => {
    trendReport(s, pts, null);
  });
  measure('decimate 4001 points to at most 4000', 20, () => {
    decimate([...pts, pts[pts.length - 1]!], 4000);
  });
} finally {
  rmSync(dir, { recursive: true, force: true });
}

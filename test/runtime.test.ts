import { describe, expect, it, vi } from 'vitest';
import { ManualClock } from '../agent/clock.js';
import { SyncAverager } from '../agent/dsp/sync-average.js';
import type { LiveFrame, WindowResult } from '../agent/dsp/types.js';
import { MemoryLogger } from '../agent/log.js';
import { AgentRuntime } from '../agent/runtime/runtime.js';
import { SerialSource } from '../drivers/serial/serial-source.js';
import { ArraySource } from './support/array-source.js';
import { testConfig } from './support/config.js';
import { synthesize } from './support/synth.js';

describe('agent runtime loop', () => {
  it('closes windows and live frames on the sample clock and never averages across a gap', async () => {
    const fs = 25600;
    const sig = synthesize({
      sampleRate: fs,
      seconds: 21,
      rpm: () => 1485,
      channels: [{ orders: [{ order: 1, velPk: 5, phaseDeg: 123 }] }],
      tachChannel: 1,
    });
    const windows: Array<[WindowResult, number]> = [];
    const lives: Array<[LiveFrame, number]> = [];
    const clock = new ManualClock(Date.UTC(2026, 11, 2, 6, 0, 0));
    const rt = new AgentRuntime({
      config: testConfig([['DE-V', 0, 'DE', 'vertical']]),
      source: new ArraySource(sig, fs, 2048, [[12 * fs, 12 * fs + 3000]]),
      clock,
      logger: new MemoryLogger(),
      windowSeconds: 5,
      liveSeconds: 1,
      windowConsumers: [{ onWindow: (w, at) => void windows.push([w, at]) }],
      liveConsumers: [{ onLive: (f, at) => void lives.push([f, at]) }],
    });
    const sum = await rt.run();
    expect(sum.gaps).toBe(1);
    expect(windows.length).toBe(4); // 21 s of samples, minus the gap, in 5 s windows
    expect(lives.length).toBeGreaterThanOrEqual(19);
    // Wall-clock time follows the sample clock, not the speed of processing.
    expect(windows[0]![1] - clock.now()).toBeCloseTo(5000, -2);
    for (const [w] of windows) {
      expect(Math.abs(w.channels[0]!.orders['1']!.phase_deg - 123)).toBeLessThan(1);
      expect(Math.abs(w.channels[0]!.orders['1']!.amp_pk_mm_s - 5)).toBeLessThan(0.05);
    }
    const withGap = windows.find(([w]) => w.gap_samples > 0)![0];
    expect(withGap.gap_samples).toBe(3000);
    expect(withGap.revolutions).toBeLessThan(windows[0]![0].revolutions);
  });

  describe('a gap shorter than a revolution (lost 256-sample serial frames) in a steady signal', () => {
    // Truth: 1x 5 mm/s pk at 123 deg, 2x 1 mm/s pk at 30 deg, white noise, 1485 r/min exactly, so
    // the tach marks (the 50 % point of the synthesized pulse, where trigger_v 2.5 V of 5 V cuts
    // it) fall at n x P samples. A serial frame is 256 samples (drivers/serial/PROTOCOL.md:
    // 128-512), a
    // revolution 1034.3: a lost frame removes a quarter of one revolution.
    const fs = 25600;
    const rpm = 1485;
    const P = (60 * fs) / rpm;
    const FRAME = 256;
    const sig = synthesize({
      sampleRate: fs,
      seconds: 12,
      rpm: () => rpm,
      channels: [
        {
          orders: [
            { order: 1, velPk: 5, phaseDeg: 123 },
            { order: 2, velPk: 1, phaseDeg: 30 },
          ],
          noiseMmS2: 200,
        },
      ],
      tachChannel: 1,
      seed: 11,
    });
    const frames = (k: number, count = 1): [number, number] => [k * FRAME, (k + count) * FRAME];
    const marksIn = ([a, b]: readonly [number, number]) => {
      const out: number[] = [];
      for (let n = Math.ceil(a / P); n * P < b; n++) out.push(n);
      return out;
    };

    async function run(gaps: Array<[number, number]>) {
      // Every revolution the averager takes, with its bounds (fractional sample indices).
      const spy = vi.spyOn(SyncAverager.prototype, 'addRevolution');
      try {
        const windows: WindowResult[] = [];
        const rt = new AgentRuntime({
          config: testConfig([['DE-V', 0, 'DE', 'vertical']]),
          source: new ArraySource(sig, fs, FRAME, gaps),
          clock: new ManualClock(Date.UTC(2026, 11, 2, 6, 0, 0)),
          logger: new MemoryLogger(),
          windowSeconds: 2,
          liveSeconds: 1,
          windowConsumers: [{ onWindow: (w) => void windows.push(w) }],
          liveConsumers: [],
        });
        const sum = await rt.run();
        const averaged = spy.mock.calls.map(([, start, end]) => [start, end] as const);
        return {
          sum,
          windows,
          averaged,
          revolutions: windows.reduce((s, w) => s + w.revolutions, 0),
        };
      } finally {
        spy.mockRestore();
      }
    }

    /**
     * Revolutions lost to one gap: each revolution between two tach marks that overlaps the gap
     * (one, plus one per mark inside it), and the first revolution after it, which the tracker uses
     * to learn the pulse interval again (docs/measuring.md, "How it measures": two consistent
     * intervals before it trusts any).
     */
    const lostTo = (g: readonly [number, number]) => marksIn(g).length + 1 + 1;

    async function check(gaps: Array<[number, number]>) {
      // The scenario is what it says: every gap shorter than a revolution, no tach pulse cut by a
      // gap edge.
      for (const g of gaps) {
        expect(g[1] - g[0]).toBeLessThan(P);
        const near = Math.min(
          ...[
            Math.floor(g[0] / P),
            Math.ceil(g[0] / P),
            Math.floor(g[1] / P),
            Math.ceil(g[1] / P),
          ].flatMap((n) => [Math.abs(n * P - g[0]), Math.abs(n * P - g[1])]),
        );
        expect(near).toBeGreaterThan(6); // the 4-sample rise sits wholly on one side
      }
      const clean = await run([]);
      const lossy = await run(gaps);
      expect(lossy.sum.gaps).toBe(gaps.length);
      expect(lossy.windows.reduce((s, w) => s + w.gap_samples, 0)).toBe(
        gaps.reduce((s, [a, b]) => s + b - a, 0),
      );
      // The spy saw every averaged revolution (one sensor: one call per revolution).
      expect(lossy.averaged.length).toBe(lossy.revolutions);
      expect(clean.averaged.length).toBe(clean.revolutions);
      // Counted: exactly the revolutions touched by a gap, and one re-learning revolution after
      // each, are dropped.
      const lost = gaps.reduce((s, g) => s + lostTo(g), 0);
      expect(clean.revolutions - lossy.revolutions).toBe(lost);
      // None averaged across a gap: no averaged revolution reads a sample inside one (linear
      // interpolation reads samples floor(start) .. ceil(end)).
      for (const [start, end] of lossy.averaged) {
        for (const [a, b] of gaps)
          expect(
            Math.ceil(end) < a || Math.floor(start) >= b,
            `revolution ${start.toFixed(1)}-${end.toFixed(1)} vs gap ${a}-${b}`,
          ).toBe(true);
      }
      // Every averaged revolution runs from one tach mark to the next (within 0.05 sample).
      for (const [start, end] of lossy.averaged) {
        const n = Math.round(start / P);
        expect(Math.abs(start - n * P)).toBeLessThan(0.05);
        expect(Math.abs(end - (n + 1) * P)).toBeLessThan(0.05);
      }
      // The 1x stays within 1 % and 1 degree of the truth in every window (issue acceptance).
      for (const w of lossy.windows) {
        const one = w.channels[0]!.orders['1']!;
        expect(Math.abs(one.amp_pk_mm_s / 5 - 1)).toBeLessThan(0.01);
        expect(Math.abs(one.phase_deg - 123)).toBeLessThan(1);
        expect(w.speed_rpm!).toBeCloseTo(rpm, 1);
      }
      return { clean, lossy, lost };
    }

    it('one lost frame in mid-revolution: two revolutions dropped, none averaged across it', async () => {
      const g = frames(305);
      expect(marksIn(g)).toEqual([]);
      const { clean, lossy, lost } = await check([g]);
      expect(lost).toBe(2);
      expect(clean.revolutions).toBeGreaterThan(280);
      expect(lossy.windows.find((w) => w.gap_samples > 0)!.gap_samples).toBe(256);
    });

    it('a few lost frames, two of them carrying a tach mark and one two frames long', async () => {
      const gaps = [frames(303), frames(504), frames(702, 2), frames(902)];
      expect(gaps.map((g) => marksIn(g).length)).toEqual([1, 0, 1, 0]);
      const { lost } = await check(gaps);
      expect(lost).toBe(10);
    });
  });
});

describe('stopping', () => {
  it('ends promptly even when the live source delivers nothing (serial board unplugged)', async () => {
    // A device path that does not exist: the serial source keeps trying to open it and yields
    // nothing.
    const source = new SerialSource({
      device: '/dev/turnwise-test-absent',
      baud: 115_200,
      sampleRateHz: 25_600,
      channels: 2,
      reconnectMinMs: 100,
      reconnectMaxMs: 200,
      stallTimeoutMs: 5000,
      queueFrames: 4,
      maxFrameBytes: 4096,
      log: new MemoryLogger(),
    });
    const rt = new AgentRuntime({
      config: testConfig([['DE-V', 0, 'DE', 'vertical']]),
      source,
      clock: new ManualClock(),
      logger: new MemoryLogger(),
      windowSeconds: 2,
      liveSeconds: 0.5,
      windowConsumers: [],
      liveConsumers: [],
    });
    const running = rt.run();
    await new Promise((r) => setTimeout(r, 500));
    const t0 = Date.now();
    rt.stop();
    const sum = await running;
    expect(sum.windows).toBe(0);
    // a systemd stop would otherwise wait for TimeoutStopSec
    expect(Date.now() - t0).toBeLessThan(5000);
  });
});

import { describe, expect, it } from 'vitest';
import { ManualClock } from '../agent/clock.js';
import type { LiveFrame, WindowResult } from '../agent/dsp/types.js';
import { MemoryLogger } from '../agent/log.js';
import { AgentRuntime } from '../agent/runtime/runtime.js';
import { ArraySource } from './support/array-source.js';
import { testConfig } from './support/config.js';
import { synthesize } from './support/synth.js';

describe('agent runtime loop', () => {
  it('closes windows and live frames on the sample clock and never averages across a gap', async () => {
    const fs = 25600;
    const sig = synthesize({ sampleRate: fs, seconds: 21, rpm: () => 1485, channels: [{ orders: [{ order: 1, velPk: 5, phaseDeg: 123 }] }], tachChannel: 1 });
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
});

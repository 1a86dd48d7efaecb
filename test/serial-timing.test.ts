/**
 * Times of live messages, windows and events from a real serial board (board emulator -> socat pty
 * -> SerialSource -> AgentRuntime): the sample clock anchored to the wall clock at the first frame
 * after every start of the agent or restart of the board, and wall-clock steps found and counted.
 * The expected time of every message is the wall clock when it was handed over (own computation:
 * a message is stamped with the time of its last sample, which arrived moments before).
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { ManualClock } from '../agent/clock.js';
import type { MemoryLogger } from '../agent/log.js';
import type { AgentRuntime } from '../agent/runtime/runtime.js';
import { SampleTimeline, type TimeStepKind } from '../agent/runtime/sample-time.js';
import {
  BoardEmulator,
  SineTachSignal,
  type DeviceWriter,
} from '../drivers/serial/board-emulator.js';
import type { SerialSource } from '../drivers/serial/serial-source.js';
import { testConfig } from './support/config.js';
import { PtyRuntimeRig } from './support/pty-runtime.js';

const RATE = 25_600;
const SPF = 256;
const FRAME_MS = (SPF / RATE) * 1000;
/**
 * A message stamped with the time of its last sample is handed over within this of the wall clock
 * (ms).
 */
const STAMP_TOLERANCE_MS = 250;

let rig: PtyRuntimeRig;
beforeEach(() => {
  rig = new PtyRuntimeRig();
});
afterEach(() => rig.dispose());

function board(firstSample: number, firstSequence: number): BoardEmulator {
  // 1481 r/min, 0.2 V at 40 degrees and 0.1 V at 250 degrees, 10 V IEPE bias on the first channel.
  const sig = new SineTachSignal(
    RATE,
    1481,
    [
      { amp_v: 0.2, lag_deg: 40, dc_v: 10 },
      { amp_v: 0.1, lag_deg: 250 },
    ],
    firstSample + 37.25,
  );
  return new BoardEmulator(sig, {
    sampleRateHz: RATE,
    samplesPerFrame: SPF,
    format: 'int24',
    scaleVPerCount: [2 ** -19, 2 ** -19],
    tachTimed: true,
    firstSample,
    firstSequence,
  });
}

interface Stamp {
  readonly kind: 'live' | 'window';
  readonly atMs: number;
  /** Wall clock when the runtime handed the message over. */
  readonly wallMs: number;
}

/**
 * Runs the runtime on the pty while `play` writes frames; returns every message's stamp and the
 * runtime (for its time counters), after `play` has finished and the runtime has stopped.
 */
async function runWithBoard(
  play: (w: DeviceWriter) => Promise<void>,
  wall: () => number = Date.now,
): Promise<{ stamps: Stamp[]; rt: AgentRuntime; log: MemoryLogger; src: SerialSource }> {
  const stamps: Stamp[] = [];
  const { source, writer, runtime } = await rig.start(
    { sampleRateHz: RATE, channels: 2, burstQuietMs: 300, nowMs: wall },
    {
      config: testConfig([
        ['DE-V', 0, 'DE', 'vertical'],
        ['DE-H', 1, 'DE', 'horizontal'],
      ]),
      // The runtime's own clock is far from the truth: live times must not come from it.
      clock: new ManualClock(Date.UTC(2020, 0, 1)),
      windowSeconds: 1,
      liveSeconds: 0.5,
      boardTimesTach: true,
      windowConsumers: [
        { onWindow: (_w, at) => void stamps.push({ kind: 'window', atMs: at, wallMs: wall() }) },
      ],
      liveConsumers: [
        { onLive: (_f, at) => void stamps.push({ kind: 'live', atMs: at, wallMs: wall() }) },
      ],
    },
  );
  await play(writer);
  // Let the last frames through, then stop.
  await rig.finish(null);
  return { stamps, rt: runtime, log: rig.log, src: source };
}

/** Writes `frames` frames in real time. */
async function realtime(b: BoardEmulator, w: DeviceWriter, frames: number): Promise<void> {
  const start = performance.now();
  for (let i = 1; i <= frames; i++) {
    await w.write(b.nextFrame());
    const wait = start + i * FRAME_MS - performance.now();
    if (wait > 1) await new Promise((r) => setTimeout(r, wait));
  }
}

function worstError(stamps: readonly Stamp[]): number {
  return Math.max(...stamps.map((s) => Math.abs(s.atMs - s.wallMs)));
}

describe('times from a serial board through a real pty', () => {
  it('a board whose clock has run for 3 hours before the agent starts: live and window times are the wall clock, not 3 h ahead', async () => {
    const threeHours = 3 * 3600 * RATE;
    const b = board(threeHours, 3 * 3600 * 100);
    const { stamps, rt } = await runWithBoard((w) =>
      realtime(b, w, Math.round(2.5 / (FRAME_MS / 1000))),
    );
    expect(stamps.filter((s) => s.kind === 'live').length).toBeGreaterThanOrEqual(4);
    expect(stamps.filter((s) => s.kind === 'window').length).toBeGreaterThanOrEqual(2);
    // Before the fix every stamp was 3 h (10 800 000 ms) in the future.
    expect(worstError(stamps)).toBeLessThan(STAMP_TOLERANCE_MS);
    expect(rt.timeHealth()).toMatchObject({
      time_anchors: 1,
      wall_clock_steps_back: 0,
      wall_clock_steps_forward: 0,
    });
  });

  it('a board restart mid-run (after 1 s of silence) anchors again: times stay on the wall clock', async () => {
    const b = board(5 * 60 * RATE, 30_000);
    const { stamps, rt, src, log } = await runWithBoard(async (w) => {
      await realtime(b, w, 150);
      await new Promise((r) => setTimeout(r, 1000)); // power cycle
      b.restart();
      await realtime(b, w, 150);
    });
    expect(src.health().clock_restarts).toBe(1);
    expect(rt.timeHealth()?.time_anchors).toBe(2);
    const restartedAt = stamps.findIndex((s, i) => i > 0 && s.wallMs - stamps[i - 1]!.wallMs > 800);
    expect(restartedAt).toBeGreaterThan(0);
    expect(stamps.slice(restartedAt).length).toBeGreaterThanOrEqual(2);
    expect(worstError(stamps)).toBeLessThan(STAMP_TOLERANCE_MS);
    expect(
      log.lines.filter((l) => l.msg.includes('sample clock restarted; times anchored again'))
        .length,
    ).toBe(1);
  });

  it('the wall clock stepped back 30 s (NTP): one clear message, counted, times follow the wall clock, sampling goes on', async () => {
    let offset = 0;
    const wall = () => Date.now() + offset;
    const b = board(0, 0);
    let stepWall = Infinity;
    const { stamps, rt, log } = await runWithBoard(async (w) => {
      await realtime(b, w, 120);
      offset = -30_000;
      stepWall = wall();
      await realtime(b, w, 160);
    }, wall);
    expect(rt.timeHealth()).toMatchObject({
      time_anchors: 2,
      wall_clock_steps_back: 1,
      wall_clock_steps_forward: 0,
    });
    const warn = log.lines.filter((l) => l.msg.includes('stepped back'));
    expect(warn.length).toBe(1);
    expect(warn[0]!.level).toBe('warn');
    const stepS = Number(
      /wall clock is (\d+\.\d{3}) s behind the board's sample clock/.exec(warn[0]!.msg)?.[1],
    );
    // the 30 s step, less this block's own latency
    expect(Math.abs(stepS - 30)).toBeLessThan(STAMP_TOLERANCE_MS / 1000);
    // Monitoring went on after the step: live messages kept coming (1.6 s of frames, one each
    // 0.5 s).
    expect(
      stamps.filter((s) => s.kind === 'live' && s.wallMs >= stepWall).length,
    ).toBeGreaterThanOrEqual(2);
    expect(worstError(stamps)).toBeLessThan(STAMP_TOLERANCE_MS);
  });
});

describe('SampleTimeline (pure)', () => {
  const fs = 1000;
  function feed(
    t: SampleTimeline,
    fromIndex: number,
    blocks: number,
    arrived: (endIndex: number) => number,
  ): void {
    for (let k = 0; k < blocks; k++) {
      const end = fromIndex + (k + 1) * 100;
      t.observe(end, arrived(end));
    }
  }

  it('anchors at the first block: the board index (hours of uptime) does not set the time', () => {
    const t = new SampleTimeline({ sampleRate: fs });
    const wall0 = Date.UTC(2026, 11, 3, 12, 0, 0);
    t.observe(3_600_000 + 100, wall0);
    expect(t.timeOf(3_600_000 + 100)).toBe(wall0);
    expect(t.timeOf(3_600_000 + 1100)).toBe(wall0 + 1000);
  });

  it('a moment of late delivery (a stalled process) is not a step; a forward step that lasts is', () => {
    const steps: TimeStepKind[] = [];
    const t = new SampleTimeline({ sampleRate: fs, onStep: (k) => void steps.push(k) });
    const wall0 = 1e12;
    t.observe(100, wall0 + 100);
    // 0.5 s of blocks 3 s late, then on time again: no step.
    feed(t, 100, 5, (e) => wall0 + e + 3000);
    feed(t, 600, 20, (e) => wall0 + e + 2);
    expect(steps).toEqual([]);
    // The wall clock jumps 5 s forward and stays: a step after one second of samples.
    feed(t, 2600, 12, (e) => wall0 + e + 5000);
    expect(steps).toEqual(['wall_clock_forward']);
    expect(t.timeOf(3800) - (wall0 + 3800 + 5000)).toBeLessThan(5);
    expect(t.health()).toMatchObject({
      time_anchors: 2,
      wall_clock_steps_forward: 1,
      wall_clock_steps_back: 0,
    });
  });

  it('slews out a board crystal 100 ppm slow against the wall clock, within 20 ms over an hour', () => {
    const t = new SampleTimeline({ sampleRate: fs });
    const wall0 = 1e12;
    let worst = 0;
    // The board's 1000 "Hz" is 999.9 Hz of wall time: sample i arrives at i / 999.9 s, plus 3 ms.
    const arrival = (e: number) => wall0 + (e / 999.9) * 1000 + 3;
    t.observe(100, arrival(100));
    for (let end = 200; end <= 3600 * fs; end += 100) {
      t.observe(end, arrival(end));
      worst = Math.max(worst, Math.abs(t.timeOf(end) - arrival(end)));
    }
    expect(worst).toBeLessThan(20);
    expect(t.health().wall_clock_steps_forward).toBe(0);
    expect(t.health().time_slew_ms).toBeGreaterThan(300); // 100 ppm of an hour is 360 ms
  });
});

describe('a board declaring its ADC delay, tach delay and channel skew (protocol version 2), through a real pty', () => {
  // A multiplexed 4-channel board with a sigma-delta ADC: every value describes the input 38 ticks
  // before its index, less the channel's skew (0, 1/4, 1/2, 3/4 of a sample period); its tach
  // input capture reports each edge 3.5 ticks late. Channel 3 carries the tach pulse as well.
  const D = 38;
  const T = 3.5;
  const SKEW = [0, 0.25, 0.5, 0.75];
  const RPM = 1481;
  const SPR = (RATE * 60) / RPM; // samples per revolution
  const LAG = [40, 160, 290]; // acceleration lag of each vibration channel, degrees (velocity: +90)
  const E0 = 37.25; // first true tach edge, ticks

  class DelayedBoard {
    readonly channelCount = 4;
    fill(first: number, n: number, out: readonly Float64Array[], edges: Float64Array): number {
      const w = (2 * Math.PI) / SPR;
      for (let c = 0; c < 4; c++) {
        const o = out[c]!;
        for (let i = 0; i < n; i++) {
          const t = first + i - D + SKEW[c]!; // the instant this value describes
          if (c < 3) o[i] = 0.2 * Math.cos(w * (t - E0) - (LAG[c]! * Math.PI) / 180);
          else {
            // 5 V pulse with a linear rise over 2 ticks, crossing 2.5 V at each true edge.
            const since = ((((t - E0) % SPR) + SPR + 1) % SPR) - 1;
            o[i] = since < -1 || since > 0.1 * SPR ? 0 : Math.min(5, 2.5 + 2.5 * since);
          }
        }
      }
      let count = 0;
      for (let k = Math.ceil((first - T - E0) / SPR); ; k++) {
        const reported = E0 + k * SPR + T;
        if (reported >= first + n) break;
        if (reported >= first) edges[count++] = reported;
      }
      return count;
    }
  }

  async function phases(declare: boolean, boardTimesTach: boolean): Promise<number[]> {
    const windows: number[][] = [];
    const { source: src, writer } = await rig.start(
      { sampleRateHz: RATE, channels: 4, boardTachEdges: boardTimesTach },
      {
        config: testConfig(
          [
            ['A', 0, 'DE', 'vertical'],
            ['B', 1, 'DE', 'horizontal'],
            ['C', 2, 'NDE', 'vertical'],
          ],
          { tachChannel: 3 },
        ),
        windowSeconds: 1,
        liveSeconds: 0.5,
        boardTimesTach,
        windowConsumers: [
          { onWindow: (w) => void windows.push(w.channels.map((c) => c.orders['1']!.phase_deg)) },
        ],
        liveConsumers: [],
      },
    );
    const b = new BoardEmulator(new DelayedBoard(), {
      sampleRateHz: RATE,
      samplesPerFrame: SPF,
      format: 'float32',
      scaleVPerCount: [1, 1, 1, 1],
      tachTimed: boardTimesTach,
      ...(declare
        ? {
            timing: {
              sampleDelayTicks: D,
              tachDelayTicks: boardTimesTach ? T : 0,
              skewTicks: SKEW,
            },
          }
        : {}),
    });
    const frames = Math.ceil((1.1 * RATE) / SPF);
    for (let i = 0; i < frames; i++) await writer.write(b.nextFrame());
    await rig.finish(frames);
    expect(windows.length).toBe(1);
    if (declare)
      expect(src.health()).toMatchObject({
        protocol_version: 2,
        sample_delay_ticks: D,
        max_skew_ticks: 0.75,
        timing_faults: 0,
      });
    return windows[0]!;
  }

  const diff = (a: number, b: number) => ((((a - b) % 360) + 540) % 360) - 180;
  for (const boardTimesTach of [true, false]) {
    const mode = boardTimesTach ? 'tach timed by the board' : 'tach found on channel 3';
    it(`${mode}: declared, the phases are the true ones within 0.05 degree`, async () => {
      const got = await phases(true, boardTimesTach);
      for (let c = 0; c < 3; c++)
        expect(Math.abs(diff(got[c]!, LAG[c]! + 90)), `channel ${c}`).toBeLessThan(0.05);
    });
    it(`${mode}: the same samples as version 1 frames (no declaration) read late by the delay, as predicted`, async () => {
      const got = await phases(false, boardTimesTach);
      for (let c = 0; c < 3; c++) {
        // Own computation: a value read d ticks late moves the peak d x
        // 360 / samples-per-revolution degrees later; board-timed edges reported T late move the
        // reference the same way; a tach found on channel 3 carries that channel's delay.
        const readLate = D - SKEW[c]! - (boardTimesTach ? T : D - SKEW[3]!);
        const predicted = (readLate * 360) / SPR;
        expect(
          Math.abs(diff(got[c]!, LAG[c]! + 90 + predicted)),
          `channel ${c}: predicted error ${predicted.toFixed(2)} degrees`,
        ).toBeLessThan(0.05);
      }
    });
  }
});

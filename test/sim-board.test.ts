/**
 * The simulated fan playing the serial acquisition board: SimBoardSignal against the simulator it
 * wraps, then the whole path through a real pseudo-terminal made by socat (Debian package socat):
 * FanSimulator -> frames -> socat pty -> SerialSource -> measurement core, in process and through
 * the `turnwise sim-board` command as a real process; clean, and with faults injected on the line
 * (garbage bytes, frames with a bad CRC, the link vanishing and coming back).
 */
import { spawn, execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterEach, describe, expect, it } from 'vitest';
import { readYamlFile, validateConfig } from '../agent/config/load.js';
import type { Config } from '../agent/config/schema.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { MemoryLogger } from '../agent/log.js';
import { createSource } from '../drivers/create-source.js';
import { BoardEmulator, playRealtime } from '../drivers/serial/board-emulator.js';
import { frameLength } from '../drivers/serial/frame.js';
import { FrameFaults, type CorruptedFrame } from '../drivers/serial/link-faults.js';
import { SerialSource } from '../drivers/serial/serial-source.js';
import { SocatLink } from '../drivers/serial/socat-link.js';
import { boardScales, SimBoardSignal } from '../drivers/sim/board-signal.js';
import { loadScenario, resolveScenario } from '../drivers/sim/scenario.js';
import { FanSimulator, type OrderVectorModel } from '../drivers/sim/simulator.js';
import type { GapMarker, SampleSource, SourceInfo } from '../drivers/source.js';
import { expectNoStack, runCli } from './support/cli.js';
import { PtyPair } from './support/pty-pair.js';
import { angleDiff, plan as testPlan, testScenario } from './sim-fixtures.js';

const CLI = fileURLToPath(new URL('../dist/agent/cli/main.js', import.meta.url));
const DAY5_1500 = 5.625; // day 5 15:00 of the invented Kessrow scenario, just after W1 was thrown
const MEASURE_S = 6;

const dirs: string[] = [];
function tempDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'tw-simboard-'));
  dirs.push(d);
  return d;
}
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

/** The invented demo config with an acquisition section. */
function demoConfig(acquisition: Record<string, unknown>): Config {
  const raw = readYamlFile('config/example.yaml', 'config', 'config/example.yaml') as Record<
    string,
    unknown
  >;
  return validateConfig({ ...raw, acquisition }, 'demo config');
}

/**
 * Reads an opened source into the measurement core until `seconds` of samples have arrived, then
 * closes it.
 */
async function measure(
  source: SampleSource,
  info: SourceInfo,
  cfg: Config,
  boardTimesTach: boolean,
  seconds: number,
): Promise<{ w: WindowResult; gaps: number }> {
  const an = new Analyzer({
    config: cfg,
    sampleRate: info.sampleRate,
    channelCount: info.channelCount,
    maxBlock: 4096,
    boardTimesTach,
    sourceName: info.description,
  });
  let samples = 0;
  let gaps = 0;
  for await (const item of source.items()) {
    an.push(item);
    if (item.kind === 'gap') gaps++;
    else if ((samples += item.channels[0]!.length) >= seconds * info.sampleRate) break;
  }
  await source.close();
  return { w: an.takeWindow(), gaps };
}

/**
 * 1x at every sensor equals the model's within 1 % in amplitude and 1 degree in phase; returns the
 * worst errors.
 */
function expectModel1x(
  w: WindowResult,
  model: readonly { id: string; amp_pk_mm_s: number; phase_deg: number }[],
): { amp_pct: number; phase_deg: number } {
  let worstAmp = 0;
  let worstPhase = 0;
  expect(model).toHaveLength(6);
  for (const m of model) {
    const got = w.channels.find((c) => c.id === m.id)!.orders['1']!;
    const amp = Math.abs(got.amp_pk_mm_s / m.amp_pk_mm_s - 1);
    const ph = Math.abs(angleDiff(got.phase_deg, m.phase_deg));
    expect(
      amp,
      `${m.id} 1x amplitude ${got.amp_pk_mm_s} vs model ${m.amp_pk_mm_s} mm/s pk`,
    ).toBeLessThan(0.01);
    expect(ph, `${m.id} 1x phase ${got.phase_deg} vs model ${m.phase_deg} deg`).toBeLessThan(1);
    worstAmp = Math.max(worstAmp, amp);
    worstPhase = Math.max(worstPhase, ph);
  }
  return { amp_pct: worstAmp * 100, phase_deg: worstPhase };
}

/**
 * The invented fan at day 5 15:00 playing a board of `channels` int24 inputs in 256-sample frames.
 */
function dayFiveBoard(
  cfg: Config,
  channels: number,
  tachTimed: boolean,
): { sim: FanSimulator; board: BoardEmulator } {
  const sim = new FanSimulator(resolveScenario(loadScenario('config/example-scenario.yaml'), cfg), {
    startS: DAY5_1500 * 86400,
  });
  const board = new BoardEmulator(
    new SimBoardSignal(sim, { channelCount: channels, maxBlock: 256 }),
    {
      sampleRateHz: sim.sampleRate,
      samplesPerFrame: 256,
      format: 'int24',
      scaleVPerCount: boardScales(sim.plan, channels, 'int24'),
      tachTimed,
    },
  );
  return { sim, board };
}

/**
 * Waits until the agent's source has opened the device (so the board can start without losing a
 * frame).
 */
async function untilConnected(source: SampleSource, device: string): Promise<void> {
  for (const t0 = Date.now(); !source.health!().connected;) {
    if (Date.now() - t0 > 5000)
      throw new Error(`the agent did not open ${device}: ${JSON.stringify(source.health!())}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

describe("SimBoardSignal: the simulated fan as the board's inputs", () => {
  const p = testPlan(testScenario({ signal: { noise_rms_g: 0.002 } }));
  const N = 4096;
  /** The simulator rendered straight through: the truth the board must hand out. */
  function reference(): { ch: Float32Array[]; edges: number[] } {
    const sim = new FanSimulator(p);
    const ch = Array.from({ length: p.channelCount }, () => new Float32Array(N + 1));
    const n = sim.render(ch, N + 1);
    return { ch, edges: Array.from(sim.edges.subarray(0, n)).filter((t) => t >= 0 && t < N) };
  }
  const ref = reference();
  const out = (channels: number, n: number) =>
    Array.from({ length: channels }, () => new Float64Array(n));

  it("hands out the simulator's samples unchanged, and each tach edge in the very call whose samples span it", () => {
    expect(ref.edges.length).toBeGreaterThan(3);
    // one sample per call: every edge falls between two calls, the case that needs the sample kept
    // back
    for (const size of [1, 256, 1000]) {
      const sig = new SimBoardSignal(new FanSimulator(p), { maxBlock: 300 });
      const edges: number[] = [];
      const buf = out(p.channelCount, size);
      const e = new Float64Array(64);
      for (let first = 0; first + size <= N; first += size) {
        const k = sig.fill(first, size, buf, e);
        for (let i = 0; i < k; i++) {
          expect(e[i]).toBeGreaterThanOrEqual(first);
          expect(e[i]).toBeLessThan(first + size);
          edges.push(e[i]!);
        }
        for (let c = 0; c < p.channelCount; c++)
          for (let i = 0; i < size; i++)
            if (buf[c]![i] !== ref.ch[c]![first + i])
              expect.fail(
                `size ${size}, channel ${c}, sample ${first + i}: ` +
                  `${buf[c]![i]} != ${ref.ch[c]![first + i]}`,
              );
      }
      const covered = N - (N % size);
      expect(edges, `frames of ${size}`).toEqual(ref.edges.filter((t) => t < covered));
    }
  });

  it("lets the fan turn on through samples the board skips, and goes on when the board's clock restarts at 0", () => {
    const sig = new SimBoardSignal(new FanSimulator(p), { maxBlock: 256 });
    const buf = out(p.channelCount, 1024);
    const e = new Float64Array(64);
    sig.fill(0, 1024, buf, e);
    // the board lost 1024 samples: the next ones are the simulator's samples 2048..3071
    let k = sig.fill(2048, 1024, buf, e);
    expect(buf[3]![0]).toBe(ref.ch[3]![2048]);
    expect(buf[6]![1023]).toBe(ref.ch[6]![3071]);
    expect(Array.from(e.subarray(0, k))).toEqual(ref.edges.filter((t) => t >= 2048 && t < 3072));
    // the board restarts: its sample 0 is the simulator's 3072, edges on the board's new clock
    k = sig.fill(0, 1024, buf, e);
    expect(buf[0]![0]).toBe(ref.ch[0]![3072]);
    expect(Array.from(e.subarray(0, k))).toEqual(
      ref.edges.filter((t) => t >= 3072).map((t) => t - 3072),
    );
  });

  it("reads 0 V on inputs the channel map does not use, and leaves out channels beyond the board's count", () => {
    const wide = new SimBoardSignal(new FanSimulator(p), { channelCount: 8 });
    const b8 = out(8, 512).map((c) => c.fill(7));
    wide.fill(0, 512, b8, new Float64Array(16));
    expect(b8[7]!.every((v) => v === 0)).toBe(true);
    expect(b8[6]![100]).toBe(ref.ch[6]![100]);
    const narrow = new SimBoardSignal(new FanSimulator(p), { channelCount: 6 });
    const b6 = out(6, 512);
    narrow.fill(0, 512, b6, new Float64Array(16));
    expect(b6[5]![511]).toBe(ref.ch[5]![511]);
  });

  it('gives each channel an input range that holds its signal: int24 counts quantise it to within half a count', () => {
    const scales = boardScales(p, 8, 'int24');
    // sensors: the IEPE supply (24 V, scenario default) over 2^23 counts; tach 1.25 x 5 V; unused
    // 10 V
    expect(scales[0]).toBeCloseTo(24 / 2 ** 23, 15);
    expect(scales[6]).toBeCloseTo(6.25 / 2 ** 23, 15);
    expect(scales[7]).toBeCloseTo(10 / 2 ** 23, 15);
    expect(boardScales(p, 7, 'float32')).toEqual([1, 1, 1, 1, 1, 1, 1]);
    const maxAbs = (c: Float32Array) => c.reduce((m, v) => Math.max(m, Math.abs(v)), 0);
    for (let c = 0; c < p.channelCount; c++)
      expect(maxAbs(ref.ch[c]!) / scales[c]!).toBeLessThan(2 ** 23);
  });
});

describe('SocatLink: bytes into a pseudo-terminal made by socat', () => {
  it('never blocks its writer: with nobody reading, whole frames are dropped and counted', async () => {
    const link = await SocatLink.start(
      { kind: 'pty', link: join(tempDir(), 'board') },
      { maxBacklogBytes: 16 * 1024 },
    );
    try {
      const frame = new Uint8Array(4096);
      let refused = 0;
      for (let i = 0; i < 200; i++) if (!link.write(frame)) refused++;
      expect(refused).toBeGreaterThan(0);
      expect(link.framesDropped).toBe(refused);
      expect(link.framesSent + link.framesDropped).toBe(200);
    } finally {
      await link.stop();
    }
  });

  it('says so when socat stops on its own, and has removed its link', async () => {
    const path = join(tempDir(), 'board');
    const link = await SocatLink.start({ kind: 'pty', link: path });
    process.kill(link.pid!, 'SIGTERM');
    await link.exited;
    expect(() => link.write(new Uint8Array(8))).toThrow(
      /board: socat stopped unexpectedly \(exit code \d+; its last message: ".*"\)/,
    );
    expect(existsSync(path)).toBe(false);
  });
});

describe('the simulated fan as the serial board through a real pseudo-terminal (socat)', () => {
  const scenarioFile = 'config/example-scenario.yaml';

  it(`in process, tach edges timed by the board and not digitised: the measurement core finds the model's 1x (${MEASURE_S} s of day 5 15:00 of the invented Kessrow fan)`, async () => {
    const dir = tempDir();
    const device = join(dir, 'board');
    // a 6-channel board: the tach reaches the agent only as edge times in the frames
    const cfg = demoConfig({
      driver: 'serial',
      device,
      sample_rate_hz: 25600,
      channels: 6,
      board_tach_edges: true,
      reconnect_min_ms: 100,
    });
    const { sim, board } = dayFiveBoard(cfg, 6, true);
    // a second of frames may wait for socat (as turnwise sim-board allows), so a stall of this
    // process loses nothing
    const link = await SocatLink.start(
      { kind: 'pty', link: device },
      { maxBacklogBytes: 100 * frameLength(6, 256, 'int24', 0) },
    );
    let stop = false;
    try {
      const log = new MemoryLogger();
      const { source, boardTimesTach } = createSource(cfg, join(dir, 'agent.yaml'), { log });
      expect(boardTimesTach).toBe(true);
      const info = await source.open();
      // the board starts once the agent listens, so no frame is dropped at the start
      await untilConnected(source, device);
      const playing = playRealtime(
        board,
        { write: async (b) => void link.write(b) },
        (256 / 25600) * 1000,
        () => stop,
      );
      const { w, gaps } = await measure(source, info, cfg, boardTimesTach, MEASURE_S);
      stop = true;
      await playing;
      expect(gaps).toBe(0);
      expect(link.framesDropped).toBe(0);
      expect(w.revolutions).toBeGreaterThan(140);
      expect(w.speed_rpm).toBeCloseTo(1485, -1);
      const worst = expectModel1x(w, sim.modelOrder(1));
      console.log(
        `in process, board-timed tach: ${w.revolutions} revolutions, ${gaps} gap(s), ` +
          `${link.framesSent} frames sent, ${link.framesDropped} dropped; worst 1x ` +
          `error ${worst.amp_pct.toFixed(3)} %, ${worst.phase_deg.toFixed(3)} deg`,
      );
    } finally {
      stop = true;
      await link.stop();
    }
    expect(existsSync(device)).toBe(false);
  }, 30_000);

  it(`in process, with garbage bytes and damaged frames on the line: every lost frame is a gap with exact bounds, CRC failures are counted, and the model's 1x is still found`, async () => {
    const dir = tempDir();
    const device = join(dir, 'board');
    // 7 channels with the tach digitised on channel 6: the tach detector also has to pick up again
    // after each gap
    const cfg = demoConfig({
      driver: 'serial',
      device,
      sample_rate_hz: 25600,
      channels: 7,
      reconnect_min_ms: 100,
    });
    const { sim, board } = dayFiveBoard(cfg, 7, false);
    // 600 frames (6 s): 200 garbage bytes after every 7th frame (85 bursts), one bit flipped in
    // every 37th (16 frames); the last frame is intact, so the last damaged one shows as a gap too
    const FRAMES = 600;
    const corrupted: CorruptedFrame[] = [];
    const faults = new FrameFaults(
      { garbageEvery: 7, garbageBytes: 200, corruptEvery: 37, seed: 11 },
      (f) => corrupted.push(f),
    );
    const link = await SocatLink.start(
      { kind: 'pty', link: device },
      { maxBacklogBytes: 100 * frameLength(7, 256, 'int24', 0) },
    );
    let corruptedBytes = 0;
    let written = 0;
    try {
      const { source, boardTimesTach } = createSource(cfg, join(dir, 'agent.yaml'), {
        log: new MemoryLogger(),
      });
      expect(boardTimesTach).toBe(false);
      const info = await source.open();
      await untilConnected(source, device);
      let frames = 0;
      const playing = playRealtime(
        board,
        {
          write: async (b) => {
            const before = faults.corruptedFrames;
            const bytes = faults.apply(b);
            if (faults.corruptedFrames > before) corruptedBytes += b.length;
            written += bytes.length;
            link.write(bytes);
            frames++;
          },
        },
        (256 / 25600) * 1000,
        () => frames >= FRAMES,
      );
      // the agent side: the measurement core, and every block and gap as the source hands them out
      const an = new Analyzer({
        config: cfg,
        sampleRate: info.sampleRate,
        channelCount: info.channelCount,
        maxBlock: 4096,
        boardTimesTach,
        sourceName: info.description,
      });
      const gaps: GapMarker[] = [];
      let next = 0;
      for await (const item of source.items()) {
        an.push(item);
        if (item.kind === 'gap') {
          gaps.push(item);
          next = item.toIndex;
        } else {
          // blocks and gaps tile the board's sample clock: nothing lost unreported, nothing
          // reported twice
          expect(item.startIndex).toBe(next);
          next = item.startIndex + item.channels[0]!.length;
        }
        if (next >= FRAMES * 256) break;
      }
      await playing;
      const h = source.health!() as Record<string, unknown>;
      await source.close();
      const w = an.takeWindow();

      expect(link.framesDropped).toBe(0);
      expect(faults).toMatchObject({
        frames: FRAMES,
        garbageBursts: 85,
        garbageBytes: 85 * 200,
        corruptedFrames: 16,
      });
      // each damaged frame, and only those, is a gap with the frame's exact sample-clock bounds
      // (PROTOCOL.md)
      expect(gaps.map((g) => [g.fromIndex, g.toIndex])).toEqual(
        corrupted.map((f) => [f.first_sample, f.first_sample + f.samples]),
      );
      expect(corrupted.map((f) => f.sequence)).toEqual(
        Array.from({ length: 16 }, (_, k) => 37 * (k + 1) - 1),
      );
      for (const g of gaps) expect(g.reason).toMatch(/1 CRC error/);
      // garbage costs no samples: all of it and the damaged frames are skipped, nothing else
      expect(h).toMatchObject({
        bytes_received: written,
        frames_ok: FRAMES - 16,
        crc_errors: 16,
        bad_lengths: 0,
        bad_headers: 0,
        gaps: 16,
        samples_lost: 16 * 256,
        bytes_skipped: 85 * 200 + corruptedBytes,
      });
      expect(w.gap_samples).toBe(16 * 256);
      // each gap costs the revolution it falls in and the tach's pick-up after it; the rest is
      // averaged
      expect(w.revolutions).toBeGreaterThan(100);
      const worst = expectModel1x(w, sim.modelOrder(1));
      console.log(
        `in process, garbage and bad CRCs: ${w.revolutions} revolutions ` +
          `(${w.revolutions_rejected} rejected), ${gaps.length} gap(s), ` +
          `${h['crc_errors']} CRC error(s), ${h['resyncs']} resync(s), ` +
          `${h['bytes_skipped']} bytes skipped; worst 1x error ` +
          `${worst.amp_pct.toFixed(3)} %, ${worst.phase_deg.toFixed(3)} deg`,
      );
    } finally {
      await link.stop();
    }
    expect(existsSync(device)).toBe(false);
  }, 30_000);

  it(`as a process: turnwise sim-board with the tach on a channel; the agent side finds the model's 1x, and SIGINT ends it and its socat`, async () => {
    const dir = tempDir();
    const device = join(dir, 'sim-board');
    const agentConfig = join(dir, 'agent.yaml');
    const raw = readYamlFile('config/example.yaml', 'config', 'config/example.yaml') as Record<
      string,
      unknown
    >;
    writeFileSync(
      agentConfig,
      JSON.stringify({
        ...raw,
        acquisition: {
          driver: 'serial',
          device,
          sample_rate_hz: 25600,
          channels: 8,
          reconnect_min_ms: 100,
        },
      }),
    );
    // the board has 8 inputs (as in the serial section's example); the channel map uses 0-6
    const child = spawn(
      process.execPath,
      [
        CLI,
        'sim-board',
        '--scenario',
        scenarioFile,
        '--config',
        agentConfig,
        '--link',
        device,
        '--from-day',
        String(DAY5_1500),
        '--json',
      ],
      { stdio: ['ignore', 'pipe', 'pipe'] },
    );
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d: Buffer) => (stdout += d.toString()));
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    const exited = new Promise<number | null>((res) => child.once('exit', (code) => res(code)));
    try {
      const t0 = Date.now();
      while (!/point the agent at it/.test(stderr)) {
        if (child.exitCode !== null || Date.now() - t0 > 10_000)
          throw new Error(`sim-board did not start: ${stderr}`);
        await new Promise((r) => setTimeout(r, 20));
      }
      expect(stderr).toContain(
        `acquisition: {driver: serial, device: ${device}, sample_rate_hz: 25600, channels: 8}`,
      );
      const cfg = validateConfig(readYamlFile(agentConfig, 'config', agentConfig), agentConfig);
      const { source, boardTimesTach } = createSource(cfg, agentConfig, {
        log: new MemoryLogger(),
      });
      expect(boardTimesTach).toBe(false);
      const { w, gaps } = await measure(
        source,
        await source.open(),
        cfg,
        boardTimesTach,
        MEASURE_S,
      );
      child.kill('SIGINT');
      expect(await exited).toBe(0);
      const summary = JSON.parse(stdout) as {
        stopped_by: string;
        socat_exit: number | string;
        frames_sent: number;
        channels: number;
        model_1x_end: OrderVectorModel[];
      };
      expect(summary).toMatchObject({ stopped_by: 'signal', channels: 8 });
      // the agent measured MEASURE_S seconds from this board, so the board sent at least that many
      // frames (exactly that many when SIGINT lands right after the last one the agent needed)
      expect(summary.frames_sent).toBeGreaterThanOrEqual((MEASURE_S * 25600) / 256);
      expect(w.revolutions).toBeGreaterThan(140);
      const worst = expectModel1x(w, summary.model_1x_end);
      console.log(
        `sim-board process, tach on channel 6: ` +
          `${w.revolutions} revolutions, ${gaps} gap(s); worst 1x error ` +
          `${worst.amp_pct.toFixed(3)} %, ${worst.phase_deg.toFixed(3)} deg`,
      );
    } finally {
      if (child.exitCode === null) {
        child.kill('SIGKILL');
        await exited;
      }
    }
    // socat stopped with it: its link is gone and no socat serves that path any more
    expect(existsSync(device)).toBe(false);
    const running = execFileSync('ps', ['-eo', 'args'], { encoding: 'utf8' });
    expect(running).not.toContain(`link=${device}`);
  }, 30_000);
});

describe('turnwise sim-board with faults injected', () => {
  it("garbage, bad CRCs and a link that vanishes and comes back: the agent reports every loss as a gap with exact bounds, reconnects, and finds the model's 1x", async () => {
    const dir = tempDir();
    const device = join(dir, 'sim-board');
    const agentConfig = join(dir, 'agent.yaml');
    const raw = readYamlFile('config/example.yaml', 'config', 'config/example.yaml') as Record<
      string,
      unknown
    >;
    writeFileSync(
      agentConfig,
      JSON.stringify({
        ...raw,
        acquisition: {
          driver: 'serial',
          device,
          sample_rate_hz: 25600,
          channels: 7,
          reconnect_min_ms: 100,
          reconnect_max_ms: 200,
        },
      }),
    );
    const args = [
      '--garbage-every',
      '5',
      '--garbage-bytes',
      '100',
      '--corrupt-every',
      '50',
      '--link-drop-at',
      '2',
      '--link-down-s',
      '1',
      '--seconds',
      '12',
    ];
    const child = spawn(
      process.execPath,
      [
        CLI,
        'sim-board',
        '--scenario',
        'config/example-scenario.yaml',
        '--config',
        agentConfig,
        '--link',
        device,
        '--from-day',
        String(DAY5_1500),
        ...args,
        '--json',
      ],
      { stdio: ['ignore', 'pipe', 'pipe'] },
    );
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d: Buffer) => (stdout += d.toString()));
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    const exited = new Promise<number | null>((res) => child.once('exit', (code) => res(code)));
    const cfg = validateConfig(readYamlFile(agentConfig, 'config', agentConfig), agentConfig);
    const { source, boardTimesTach } = createSource(cfg, agentConfig, { log: new MemoryLogger() });
    try {
      const info = await source.open(); // waits for the link to appear, as the agent does
      const an = new Analyzer({
        config: cfg,
        sampleRate: info.sampleRate,
        channelCount: info.channelCount,
        maxBlock: 4096,
        boardTimesTach,
        sourceName: info.description,
      });
      const gaps: GapMarker[] = [];
      let next: number | null = null;
      let first: number | null = null;
      let samples = 0;
      const reading = (async () => {
        for await (const item of source.items()) {
          an.push(item);
          if (item.kind === 'gap') {
            gaps.push(item);
            expect(item.fromIndex).toBe(next);
            next = item.toIndex;
          } else {
            if (next !== null) expect(item.startIndex).toBe(next);
            first ??= item.startIndex;
            next = item.startIndex + item.channels[0]!.length;
            samples += item.channels[0]!.length;
          }
        }
      })();
      expect(await exited).toBe(0);
      // what was written before sim-board ended has been read once the agent goes quiet
      for (let last = -1; samples !== last;) {
        last = samples;
        await new Promise((r) => setTimeout(r, 300));
      }
      const h = source.health!() as Record<string, number>;
      await source.close();
      await reading;
      const w = an.takeWindow();
      const summary = JSON.parse(stdout) as Record<string, number> & {
        model_1x_end: OrderVectorModel[];
      };
      expect(stderr).toMatch(
        /faults injected: 100 garbage bytes after every 5 frames; one bit flipped \(bad CRC\) in one frame in 50; the link removed at 2 s of signal and made again 1 s later/,
      );
      expect(stderr).toMatch(
        /link dropped at 2\.00 s of signal: .*sim-board removed, made again in 1 s\n[^]*link back at 3\.00 s of signal/,
      );
      // 12 s of frames: those from 2 s to 3 s of signal never sent (the link was gone); the rest
      // handed to socat, or dropped whole when the agent was more than a second late to read (rare,
      // on a loaded machine)
      expect(summary, stdout).toMatchObject({
        stopped_by: 'seconds',
        link_drops: 1,
        frames_unsent_link_down: 100,
        garbage_bursts: 220,
        garbage_bytes: 22_000,
        frames_corrupted: 22,
      });
      expect(summary.frames_sent + summary.frames_dropped).toBe(1100);
      // The frames damaged: every 50th handed to the link, i.e. sequence 49, 99, 149, 199 before
      // the drop and (the count going on after the 100 unsent frames) 349, 399, ... 1199 after it.
      const damaged = Array.from({ length: 1200 }, (_, seq) => seq).filter(
        (seq) => (seq < 200 ? seq + 1 : seq >= 300 ? seq + 1 - 100 : 1) % 50 === 0,
      );
      expect(damaged).toHaveLength(22);
      // one gap for the link drop: from the last frame before it to the first read after the agent
      // reopened
      const down = gaps.filter((g) => /device disconnected/.test(g.reason));
      expect(down).toHaveLength(1);
      expect(down[0]!.fromIndex).toBeLessThanOrEqual(200 * 256);
      expect(down[0]!.toIndex).toBeGreaterThanOrEqual(300 * 256);
      expect(down[0]!.fromIndex % 256).toBe(0);
      expect(down[0]!.toIndex % 256).toBe(0);
      // frames the board dropped whole (none, unless the agent fell a second behind) are gaps of
      // their own
      const crcGap =
        /^sequence jump \d+ -> \d+ \(1 frame\(s\) missing\); since the last good frame: 1 CRC error\(s\), 5576 byte\(s\) skipped$/;
      const crcGaps = gaps.filter((g) => g !== down[0] && crcGap.test(g.reason));
      const boardDrops = gaps.filter((g) => g !== down[0] && !crcGap.test(g.reason));
      for (const g of boardDrops)
        expect(g.reason).toMatch(/^sequence jump \d+ -> \d+ \(\d+ frame\(s\) missing\)/);
      expect(
        boardDrops.reduce((n, g) => n + (g.toIndex - g.fromIndex) / 256, 0),
      ).toBeLessThanOrEqual(summary.frames_dropped);
      // every CRC gap is one damaged frame, exactly its samples; every damaged frame is one, unless
      // it fell in another gap, before the first frame the agent read (it opens the link a moment
      // after it appears) or is the very last frame (1199: no good frame follows to show its gap)
      const inOther = (seq: number) =>
        [...down, ...boardDrops].some((g) => seq * 256 >= g.fromIndex && seq * 256 < g.toIndex);
      expect(first!).toBeLessThan(20 * 256);
      expect(crcGaps.map((g) => [g.fromIndex, g.toIndex])).toEqual(
        damaged
          .filter((seq) => seq * 256 > first! && seq * 256 < next! && !inOther(seq))
          .map((seq) => [seq * 256, (seq + 1) * 256]),
      );
      expect(crcGaps.length).toBeGreaterThanOrEqual(18);
      // CRC failures counted: those gaps, the last frame, and any damaged frame read just before
      // another gap (e.g. frame 199 just before the link drop, its gap then merged into the drop's)
      expect(h['crc_errors']).toBeGreaterThanOrEqual(crcGaps.length + 1);
      expect(h['crc_errors']).toBeLessThanOrEqual(
        crcGaps.length + 1 + down.length + boardDrops.length,
      );
      expect(h).toMatchObject({
        reconnects: 1,
        bad_lengths: 0,
        bad_headers: 0,
        rejected_frames: 0,
        gaps: gaps.length,
      });
      const worst = expectModel1x(w, summary.model_1x_end);
      console.log(
        `sim-board process with faults: ${w.revolutions} revolutions, ` +
          `${gaps.length} gap(s); worst 1x error ` +
          `${worst.amp_pct.toFixed(3)} %, ${worst.phase_deg.toFixed(3)} deg`,
      );
    } finally {
      await source.close();
      if (child.exitCode === null) {
        child.kill('SIGKILL');
        await exited;
      }
    }
    expect(existsSync(device)).toBe(false);
  }, 30_000);
});

describe('turnwise sim-board killed outright', () => {
  it('takes socat with it even while socat is blocked on a full pseudo-terminal nobody reads', async () => {
    const device = join(tempDir(), 'board');
    const child = spawn(
      process.execPath,
      [
        CLI,
        'sim-board',
        '--scenario',
        'config/example-scenario.yaml',
        '--config',
        'config/example.yaml',
        '--link',
        device,
        '--from-day',
        '1',
      ],
      { stdio: 'ignore' },
    );
    const exited = new Promise((res) => child.once('exit', res));
    const socatFor = () =>
      execFileSync('ps', ['-eo', 'args'], { encoding: 'utf8' })
        .split('\n')
        .filter((l) => l.includes(`link=${device}`));
    try {
      for (const t0 = Date.now(); !existsSync(device);) {
        if (Date.now() - t0 > 10_000) throw new Error('sim-board did not make its link');
        await new Promise((r) => setTimeout(r, 20));
      }
      // a second of frames with nobody reading: the pseudo-terminal is full and socat waits on it
      await new Promise((r) => setTimeout(r, 1000));
      expect(socatFor()).toHaveLength(1);
    } finally {
      child.kill('SIGKILL');
      await exited;
    }
    for (const t0 = Date.now(); socatFor().length > 0 || existsSync(device);) {
      if (Date.now() - t0 > 5000)
        throw new Error(
          `socat outlived sim-board: ${socatFor().join('; ')}; ` +
            `link ${existsSync(device) ? 'still there' : 'gone'}`,
        );
      await new Promise((r) => setTimeout(r, 50));
    }
  }, 20_000);
});

describe('turnwise sim-board --device: into an existing serial line', () => {
  it('writes intact int16 frames with board-timed tach edges into one end of a pty pair; the agent reads them at the other', async () => {
    const pty = new PtyPair();
    await pty.start();
    const child = spawn(
      process.execPath,
      [
        CLI,
        'sim-board',
        '--scenario',
        'config/example-scenario.yaml',
        '--config',
        'config/example.yaml',
        '--device',
        pty.boardPath,
        '--baud',
        '115200',
        '--from-day',
        '1',
        '--format',
        'int16',
        '--tach-edges',
        '--seconds',
        '2',
        '--json',
      ],
      { stdio: ['ignore', 'pipe', 'pipe'] },
    );
    let stdout = '';
    child.stdout.on('data', (d: Buffer) => (stdout += d.toString()));
    const exited = new Promise<number | null>((res) => child.once('exit', (code) => res(code)));
    const source = new SerialSource({
      device: pty.agentPath,
      baud: 115_200,
      sampleRateHz: 25_600,
      channels: 7,
      reconnectMinMs: 100,
      reconnectMaxMs: 400,
      stallTimeoutMs: 60_000,
      queueFrames: 1024,
      maxFrameBytes: 65_536,
      log: new MemoryLogger(),
    });
    try {
      await source.open();
      let blocks = 0;
      let edges = 0;
      for await (const item of source.items()) {
        if (item.kind !== 'samples') continue;
        expect(item.tachEdges, 'every frame says the board times the tach').toBeDefined();
        edges += item.tachEdges!.length;
        if (++blocks === 150) break;
      }
      expect(await exited).toBe(0);
      const h = source.health();
      expect(h).toMatchObject({
        crc_errors: 0,
        bad_lengths: 0,
        bad_headers: 0,
        rejected_frames: 0,
      });
      // 150 frames of 10 ms at about 24.75 rev/s hold 37 edges, give or take one
      expect(Math.abs(edges - 150 * 0.01 * (1485 / 60))).toBeLessThan(2);
      expect(JSON.parse(stdout)).toMatchObject({
        target: 'device',
        path: pty.boardPath,
        format: 'int16',
        tach_edges_in_frames: true,
        stopped_by: 'seconds',
        frames_dropped: 0,
      });
    } finally {
      await source.close();
      if (child.exitCode === null) child.kill('SIGKILL');
      await pty.dispose();
    }
  }, 20_000);
});

describe('turnwise sim-board: bad input', () => {
  const base = [
    'sim-board',
    '--scenario',
    'config/example-scenario.yaml',
    '--config',
    'config/example.yaml',
    '--seconds',
    '0.2',
  ];

  it('says to install socat when it is missing', () => {
    const r = runCli([...base, '--link', join(tempDir(), 'b')], { env: { PATH: tempDir() } });
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /socat is not installed .*\n\s+-> install socat \(Debian\/Ubuntu: apt-get install socat\)/,
    );
    expectNoStack(r.stderr);
  });

  it("refuses a board without room for the channel map, a board the agent's config contradicts, a link path in use and a bad option", () => {
    const dir = tempDir();
    const cfgFile = join(dir, 'agent.yaml');
    const raw = readYamlFile('config/example.yaml', 'config', 'config/example.yaml') as Record<
      string,
      unknown
    >;
    writeFileSync(
      cfgFile,
      JSON.stringify({
        ...raw,
        acquisition: { driver: 'serial', device: '/dev/null', sample_rate_hz: 51200, channels: 8 },
      }),
    );
    const taken = join(dir, 'taken');
    writeFileSync(taken, 'not a link');
    const withCfg = [
      'sim-board',
      '--scenario',
      'config/example-scenario.yaml',
      '--config',
      cfgFile,
    ];
    const cases: [string[], RegExp | string][] = [
      [
        [...base, '--channels', '6'],
        /turnwise sim-board --channels: the board would send 6 channel\(s\), but the config uses channel 6 \(sensors and tach\)\n\s+-> send at least 7 channels, or let the board time the tach \(--tach-edges\)/,
      ],
      [
        [...withCfg, '--channels', '7'],
        `turnwise sim-board --channels: is 7 but ${cfgFile} tells the agent to ` +
          `expect 8 (acquisition.channels); the agent would reject every frame`,
      ],
      [
        withCfg,
        `${cfgFile}: acquisition.sample_rate_hz: is 51200 Hz but the scenario samples at 25600 Hz`,
      ],
      [
        [...base, '--link', taken],
        /taken: already exists and is not a link to a pseudo-terminal\n\s+-> choose another --link path/,
      ],
      [
        [...base, '--link', join(dir, 'b'), '--format', 'int12'],
        /--format: expected one of int24, int16, float32, got "int12"/,
      ],
      [[...base, '--link', join(dir, 'b'), '--baud', '9600'], /--baud applies to --device only/],
      [
        [...base, '--link', join(dir, 'b,c')],
        /b,c: socat cannot take a path with "," or "!" in it\n\s+-> choose a path without them/,
      ],
      [
        [...base, '--device', '/dev/null', '--link-drop-at', '1'],
        /--link-drop-at needs the pseudo-terminal \(--link\): a serial device given with --device cannot be removed and made again/,
      ],
      [
        [...base, '--link', join(dir, 'b'), '--garbage-every', '0'],
        /turnwise sim-board --garbage-every: expected a whole number of frames from 1 to 1000000, got "0"/,
      ],
    ];
    for (const [args, want] of cases) {
      const r = runCli(args);
      expect(r.code, args.join(' ')).toBe(2);
      if (typeof want === 'string') expect(r.stderr).toContain(want);
      else expect(r.stderr).toMatch(want);
      expectNoStack(r.stderr);
    }
    expect(existsSync(join(dir, 'b'))).toBe(false);
  });
});

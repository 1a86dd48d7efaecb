/**
 * The real SerialSource (serialport 13) reading a real pseudo-terminal made by socat, with the
 * board emulator writing frames into the other end.
 */
import { execFileSync } from 'node:child_process';
import { closeSync, mkdtempSync, openSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { SerialPort } from 'serialport';
import { probeSerialCommand } from '../agent/cli/commands/probe-serial.js';
import {
  BoardEmulator,
  DeviceWriter,
  SineTachSignal,
  playRealtime,
  type BoardSignal,
} from '../drivers/serial/board-emulator.js';
import { PortReader, type ReadMode } from '../drivers/serial/port-reader.js';
import { listPorts } from '../drivers/serial/ports.js';
import {
  SerialSource,
  reconnectDelayMs,
  type SerialSourceOptions,
} from '../drivers/serial/serial-source.js';
import type { GapMarker } from '../drivers/source.js';
import { PtyPair } from './support/pty-pair.js';
import { MemoryLogger } from '../agent/log.js';

const RATE = 25_600;
const SPF = 256;
const CHANNELS = 4;
const SCALES = [2 ** -20, 2 ** -19, 2 ** -21, 2 ** -18];
const OFFSETS = [0, 0.5, -1, 0];
const EDGE_PERIOD = 1037.25; // samples per revolution: about 1481 r/min at 25.6 kHz
const FIRST_EDGE = 100.5;

function countAt(c: number, i: number): number {
  return ((i * 7919 + c * 104729) % 4_000_001) - 2_000_000;
}

/**
 * Volts the agent must deliver for board sample i of channel c (int24 count x scale + offset, in
 * float32).
 */
function expectedVolts(c: number, i: number): number {
  return Math.fround(countAt(c, i) * Math.fround(SCALES[c]!) + Math.fround(OFFSETS[c]!));
}

/** A signal whose quantised counts are known exactly: count = countAt(c, i). */
class RampSignal implements BoardSignal {
  readonly channelCount = CHANNELS;
  fill(first: number, n: number, out: readonly Float64Array[], edges: Float64Array): number {
    for (let c = 0; c < CHANNELS; c++)
      for (let i = 0; i < n; i++) out[c]![i] = countAt(c, first + i) * SCALES[c]! + OFFSETS[c]!;
    let count = 0;
    for (let k = Math.ceil((first - FIRST_EDGE) / EDGE_PERIOD); ; k++) {
      const e = FIRST_EDGE + k * EDGE_PERIOD;
      if (e >= first + n) break;
      edges[count++] = e;
    }
    return count;
  }
}

function newBoard(firstSample = 0): BoardEmulator {
  return new BoardEmulator(new RampSignal(), {
    sampleRateHz: RATE,
    samplesPerFrame: SPF,
    format: 'int24',
    scaleVPerCount: SCALES,
    offsetV: OFFSETS,
    tachTimed: true,
    firstSample,
  });
}

interface Received {
  blocks: { startIndex: number; channels: Float32Array[]; tachEdges: number[] }[];
  arrivals: number[];
  gaps: GapMarker[];
  done: Promise<void>;
}

/** Consumes the source in the background, copying every block (its arrays are reused). */
function consume(source: SerialSource): Received {
  const r: Received = { blocks: [], arrivals: [], gaps: [], done: Promise.resolve() };
  r.done = (async () => {
    for await (const item of source.items()) {
      if (item.kind === 'gap') r.gaps.push(item);
      else {
        r.blocks.push({
          startIndex: item.startIndex,
          channels: item.channels.map((c) => Float32Array.from(c)),
          tachEdges: Array.from(item.tachEdges ?? []),
        });
        r.arrivals.push(item.arrivedMs ?? NaN);
      }
    }
  })();
  return r;
}

async function waitFor(what: string, cond: () => boolean, timeoutMs = 10_000): Promise<void> {
  const t0 = Date.now();
  while (!cond()) {
    if (Date.now() - t0 > timeoutMs)
      throw new Error(`timed out after ${timeoutMs} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

/** Every block's samples and tach edges are exactly what the board sent. */
function expectExact(blocks: Received['blocks']): void {
  for (const b of blocks) {
    for (let c = 0; c < CHANNELS; c++) {
      const ch = b.channels[c]!;
      expect(ch.length).toBe(SPF);
      for (let i = 0; i < SPF; i++)
        if (ch[i] !== expectedVolts(c, b.startIndex + i))
          expect.fail(
            `channel ${c} sample ${b.startIndex + i}: ` +
              `${ch[i]} != ${expectedVolts(c, b.startIndex + i)}`,
          );
    }
    const edges: number[] = [];
    for (
      let k = Math.ceil((b.startIndex - FIRST_EDGE) / EDGE_PERIOD);
      FIRST_EDGE + k * EDGE_PERIOD < b.startIndex + SPF;
      k++
    )
      edges.push(FIRST_EDGE + k * EDGE_PERIOD);
    expect(b.tachEdges).toEqual(edges);
  }
}

let pty: PtyPair;
let source: SerialSource | null;
let writer: DeviceWriter | null;
let log: MemoryLogger;

function makeSource(overrides: Partial<SerialSourceOptions> = {}): SerialSource {
  source = new SerialSource({
    device: pty.agentPath,
    baud: 921_600,
    sampleRateHz: RATE,
    channels: CHANNELS,
    reconnectMinMs: 100,
    reconnectMaxMs: 400,
    stallTimeoutMs: 60_000,
    queueFrames: 4096,
    maxFrameBytes: 65_536,
    log,
    tickMs: 50,
    burstQuietMs: 300,
    ...overrides,
  });
  return source;
}

/** Brings the pty up, opens the source, starts consuming, and opens the board's end for writing. */
async function startStreaming(
  overrides: Partial<SerialSourceOptions> = {},
): Promise<{ src: SerialSource; got: Received; w: DeviceWriter }> {
  await pty.start();
  const src = makeSource(overrides);
  await src.open();
  const got = consume(src);
  await waitFor('connection', () => src.health().connected);
  writer = await DeviceWriter.open(pty.boardPath);
  return { src, got, w: writer };
}

beforeEach(async () => {
  pty = new PtyPair();
  log = new MemoryLogger();
  source = null;
  writer = null;
});

afterEach(async () => {
  await source?.close();
  await writer?.close().catch(() => {});
  await pty.dispose();
});

describe('SerialSource through a real pseudo-terminal', () => {
  it('delivers a clean stream with exact volts and tach edges, no gaps', async () => {
    await pty.start();
    const src = makeSource();
    const info = await src.open();
    expect(info).toMatchObject({ sampleRate: RATE, channelCount: CHANNELS });
    const got = consume(src);
    await waitFor('connection', () => src.health().connected);
    writer = await DeviceWriter.open(pty.boardPath);
    const board = newBoard(5000);
    for (let k = 0; k < 60; k++) await writer.write(board.nextFrame());
    await waitFor('60 blocks', () => got.blocks.length === 60);
    expect(got.gaps).toEqual([]);
    expect(got.blocks.map((b) => b.startIndex)).toEqual(
      Array.from({ length: 60 }, (_, k) => 5000 + k * SPF),
    );
    expectExact(got.blocks);
    expect(got.blocks.reduce((n, b) => n + b.tachEdges.length, 0)).toBe(
      Math.floor((5000 + 60 * SPF - FIRST_EDGE) / EDGE_PERIOD) -
        Math.ceil((5000 - FIRST_EDGE) / EDGE_PERIOD) +
        1,
    );
    const h = src.health();
    expect(h).toMatchObject({
      frames_ok: 60,
      crc_errors: 0,
      bad_lengths: 0,
      resyncs: 0,
      bytes_skipped: 0,
      gaps: 0,
      samples_lost: 0,
      reconnects: 0,
    });
    // The agent tried to assert DTR and RTS: a pseudo-terminal has no modem lines and refuses the
    // ioctl (Linux tty driver).
    expect(h.modem_lines).toMatch(/^not supported by the device \(.*Inappropriate ioctl/);
    expect(
      log.lines.filter(
        (l) =>
          l.level === 'info' &&
          /: opened, 8N1 at 921600 bit\/s, DTR and RTS not supported by the device/.test(l.msg),
      ).length,
    ).toBe(1);
    // Version 1 frames: no timing declared.
    expect(h).toMatchObject({ protocol_version: 1, sample_delay_ticks: null, timing_faults: 0 });
    // Every block carries the wall-clock time it arrived, for the runtime's time anchoring.
    expect(
      got.arrivals.every(
        (t, i) => t >= (got.arrivals[i - 1] ?? 0) && Math.abs(t - Date.now()) < 30_000,
      ),
    ).toBe(true);
    await src.close();
    await got.done; // the item stream ends on close
  });

  it('resynchronises after garbage between frames and inside a frame; the hit frame is an exact gap', async () => {
    const { src, got, w } = await startStreaming();
    const board = newBoard();
    for (let k = 0; k < 10; k++) await w.write(board.nextFrame());
    // Garbage without the sync word's first byte, so every one of its bytes must be skipped.
    const junk = Buffer.from(
      Array.from({ length: 500 }, (_, i) =>
        ((i * 37 + 11) & 0xff) === 0xa5 ? 0x42 : (i * 37 + 11) & 0xff,
      ),
    );
    await w.write(junk);
    for (let k = 10; k < 20; k++) await w.write(board.nextFrame());
    const hitIndex = board.nextIndex;
    const hit = Buffer.from(board.nextFrame());
    const hitWithJunk = Buffer.concat([
      hit.subarray(0, 300),
      junk.subarray(0, 77),
      hit.subarray(300),
    ]);
    await w.write(hitWithJunk);
    for (let k = 21; k < 30; k++) await w.write(board.nextFrame());
    await waitFor('29 blocks', () => got.blocks.length === 29);
    const h = src.health();
    expect(h.frames_ok).toBe(29);
    expect(h.resyncs).toBe(2);
    expect(h.crc_errors).toBe(1);
    expect(h.bytes_skipped).toBe(500 + hitWithJunk.length);
    expect(got.gaps).toEqual([
      expect.objectContaining({
        fromIndex: hitIndex,
        toIndex: hitIndex + SPF,
        reason: expect.stringMatching(/sequence jump 19 -> 21.*1 CRC error/),
      }),
    ]);
    expect(h).toMatchObject({ gaps: 1, samples_lost: SPF });
    expectExact(got.blocks);
  });

  it('reports damaged CRCs, bad lengths and dropped frames as gaps with exact bounds, logging once per burst', async () => {
    const { src, got, w } = await startStreaming();
    const board = newBoard(1_000_000);
    const expectedGaps: [number, number][] = [];
    for (let k = 0; k < 40; k++) {
      const at = board.nextIndex;
      if (k >= 5 && k < 25 && k % 2 === 1) {
        // A burst of 10 frames with one flipped bit in a sample.
        const f = Buffer.from(board.nextFrame());
        f[f.length - 20] ^= 0x10;
        await w.write(f);
        expectedGaps.push([at, at + SPF]);
      } else if (k === 30) {
        const f = Buffer.from(board.nextFrame());
        f.writeUInt32LE(f.readUInt32LE(8) - 6, 8);
        await w.write(f);
        expectedGaps.push([at, at + SPF]);
      } else if (k >= 33 && k < 36) {
        board.skipFrame(); // lost on the link
        if (k === 33) expectedGaps.push([at, at + 3 * SPF]);
      } else await w.write(board.nextFrame());
    }
    await waitFor('all good frames', () => got.blocks.length === 40 - 10 - 1 - 3);
    expect(got.gaps.map((g) => [g.fromIndex, g.toIndex])).toEqual(expectedGaps);
    expect(got.gaps[10]!.reason).toMatch(/1 bad length/);
    expect(got.gaps[11]!.reason).toBe('sequence jump 32 -> 36 (3 frame(s) missing)');
    const h = src.health();
    expect(h).toMatchObject({
      frames_ok: 26,
      crc_errors: 10,
      bad_lengths: 1,
      gaps: 12,
      samples_lost: 14 * SPF,
    });
    expectExact(got.blocks);
    // Ten CRC errors in one burst: one line when it starts, not one per frame.
    expect(log.lines.filter((l) => /CRC mismatch/.test(l.msg)).length).toBe(1);
    // Each gap of the burst stays visible: one debug line each with its bounds, the last in the
    // health report.
    const gapLines = log.lines.filter(
      (l) => l.level === 'debug' && /: gap \d+ \.\. \d+: /.test(l.msg),
    );
    expect(gapLines.map((l) => [l.fields['from_index'], l.fields['to_index']])).toEqual(
      expectedGaps,
    );
    expect(h).toMatchObject({
      last_gap_from_index: expectedGaps.at(-1)![0],
      last_gap_to_index: expectedGaps.at(-1)![1],
      last_gap_reason: 'sequence jump 32 -> 36 (3 frame(s) missing)',
    });
    await waitFor(
      'burst summary',
      () => log.lines.filter((l) => /"crc" burst over: 10 occurrence/.test(l.msg)).length === 1,
      3000,
    );
    expect(h.last_error).toMatch(/sequence jump 32 -> 36|samples lost/);
  });

  it('board-timed edges are used only with board_tach_edges: true; a disagreeing board is reported once per burst', async () => {
    const { src, got, w } = await startStreaming({ boardTachEdges: false });
    const board = newBoard();
    for (let k = 0; k < 20; k++) await w.write(board.nextFrame());
    await waitFor('20 blocks', () => got.blocks.length === 20);
    expect(got.blocks.every((b) => b.tachEdges.length === 0)).toBe(true); // edges not passed on
    expect(src.health().tach_mode_mismatches).toBe(20);
    const lines = log.lines.filter((l) =>
      /carries board-timed tach edges but acquisition\.board_tach_edges is false/.test(l.msg),
    );
    expect(lines.length).toBe(1);
    expect(lines[0]!.level).toBe('warn');
  });

  it('bad input from the board: a rate beyond the tolerance and an impossible timing declaration, each one warning, counted, sampling goes on', async () => {
    const { src, got, w } = await startStreaming({ sampleRateTolerancePpm: 100 });
    const mk = (
      rate: number,
      first: number,
      seq: number,
      timing?: { sampleDelayTicks: number; tachDelayTicks: number; skewTicks: number[] },
    ) =>
      new BoardEmulator(new RampSignal(), {
        sampleRateHz: rate,
        samplesPerFrame: SPF,
        format: 'int24',
        scaleVPerCount: SCALES,
        offsetV: OFFSETS,
        tachTimed: true,
        firstSample: first,
        firstSequence: seq,
        ...(timing ? { timing } : {}),
      });
    // 25 700 Hz is +3906 ppm: rejected; 25 601 Hz is +39 ppm: accepted.
    const far = mk(25_700, 0, 0);
    for (let k = 0; k < 10; k++) await w.write(far.nextFrame());
    const near = mk(25_601, far.nextIndex, far.nextSequence);
    for (let k = 0; k < 10; k++) await w.write(near.nextFrame());
    // A skew of 1.5 sample periods is impossible: samples still delivered.
    const bad = mk(RATE, near.nextIndex, near.nextSequence, {
      sampleDelayTicks: 38,
      tachDelayTicks: 0,
      skewTicks: [0, 1.5, 0, 0],
    });
    for (let k = 0; k < 10; k++) await w.write(bad.nextFrame());
    await waitFor('20 blocks', () => got.blocks.length === 20);
    const h = src.health();
    expect(h).toMatchObject({
      connected: true,
      frames_ok: 20,
      rejected_frames: 10,
      timing_faults: 10,
      protocol_version: 2,
      sample_delay_ticks: null,
    });
    const rate = log.lines.filter((l) =>
      /sample rate 25700 Hz declared, \+3906 ppm from the configured 25600 Hz, beyond the tolerance of 100 ppm/.test(
        l.msg,
      ),
    );
    expect(rate.map((l) => l.level)).toEqual(['warn']);
    const timing = log.lines.filter((l) =>
      /impossible timing declaration \(channel 1 skew_ticks 1\.5 outside 0 to below 1/.test(l.msg),
    );
    expect(timing.map((l) => l.level)).toEqual(['warn']);
    expect(timing[0]!.msg).toMatch(/none yet: no delay compensation/);
  });

  it('reopens with backoff after the device vanishes, resumes sampling and reports the exact gap', async () => {
    const { src, got, w } = await startStreaming();
    const board = newBoard();
    for (let k = 0; k < 10; k++) await w.write(board.nextFrame());
    await waitFor('10 blocks', () => got.blocks.length === 10);
    const lostFrom = board.nextIndex;

    // Unplug: socat goes away with both ends of the pty.
    await w.close();
    writer = null;
    await pty.stop();
    await waitFor('disconnect noticed', () => !src.health().connected);
    await waitFor('several failed reopen attempts', () => src.health().open_failures >= 3);
    expect(src.health().last_error).toMatch(/does not exist/);
    // The board keeps sampling while unplugged: 7 frames never reach the agent.
    for (let k = 0; k < 7; k++) board.skipFrame();

    // Plug back in.
    await pty.start();
    await waitFor('reconnect', () => src.health().reconnects === 1 && src.health().connected);
    const w2 = await DeviceWriter.open(pty.boardPath);
    writer = w2;
    const resumeAt = board.nextIndex;
    for (let k = 0; k < 10; k++) await w2.write(board.nextFrame());
    await waitFor('20 blocks', () => got.blocks.length === 20);

    expect(got.gaps).toEqual([expect.objectContaining({ fromIndex: lostFrom, toIndex: resumeAt })]);
    expect(resumeAt - lostFrom).toBe(7 * SPF);
    expect(got.gaps[0]!.reason).toMatch(/sequence jump 9 -> 17 .*device disconnected/);
    expectExact(got.blocks);
    const h = src.health();
    expect(h).toMatchObject({ reconnects: 1, connected: true, samples_lost: 7 * SPF });
    // Logged once per burst: one "does not exist" line however many attempts failed.
    expect(h.open_failures).toBeGreaterThanOrEqual(3);
    expect(log.lines.filter((l) => /does not exist/.test(l.msg)).length).toBe(1);
    expect(log.lines.filter((l) => /stable serial links present now/.test(l.msg)).length).toBe(1);
  });

  it('waits for a device that is absent at start, then samples', async () => {
    const src = makeSource();
    await src.open(); // resolves although the device is not there: the agent keeps trying
    const got = consume(src);
    await waitFor('a failed attempt', () => src.health().open_failures >= 1);
    expect(src.health().connected).toBe(false);
    await pty.start();
    await waitFor('connection', () => src.health().connected);
    writer = await DeviceWriter.open(pty.boardPath);
    const board = newBoard();
    for (let k = 0; k < 3; k++) await writer.write(board.nextFrame());
    await waitFor('3 blocks', () => got.blocks.length === 3);
    expectExact(got.blocks);
    expect(src.health().reconnects).toBe(0);
  });

  it('explains "Cannot lock port" while another program holds the device, and gets it once released', async () => {
    await pty.start();
    const other = new SerialPort({ path: pty.agentPath, baudRate: 9600, autoOpen: false });
    await new Promise<void>((res, rej) => other.open((e) => (e ? rej(e) : res())));
    const src = makeSource();
    await src.open();
    await waitFor('a failed attempt', () => src.health().open_failures >= 1);
    expect(src.health().last_error).toMatch(/locked by another open handle/);
    expect(log.lines.filter((l) => /another program .* has the port open/.test(l.msg)).length).toBe(
      1,
    );
    await new Promise<void>((res) => other.close(() => res()));
    await waitFor('connection', () => src.health().connected);
  });

  it('closes and reopens a device that goes silent', async () => {
    const { src, got, w } = await startStreaming({ stallTimeoutMs: 300 });
    const board = newBoard();
    await w.write(board.nextFrame());
    await waitFor('a stall', () => src.health().stalls >= 1);
    await waitFor('reopened', () => src.health().reconnects >= 1 && src.health().connected);
    for (let k = 0; k < 3; k++) await w.write(board.nextFrame());
    await waitFor('4 blocks', () => got.blocks.length === 4);
    expectExact(got.blocks);
    expect(src.health().last_error).toMatch(/no good frame for/);
  });

  it('drops frames when the consumer falls behind and reports them as one gap', async () => {
    await pty.start();
    const src = makeSource({ queueFrames: 4 });
    await src.open();
    await waitFor('connection', () => src.health().connected);
    writer = await DeviceWriter.open(pty.boardPath);
    const board = newBoard();
    for (let k = 0; k < 12; k++) await writer.write(board.nextFrame());
    await waitFor('12 frames decoded', () => src.health().frames_ok === 12);
    const got = consume(src);
    await writer.write(board.nextFrame());
    await waitFor('5 blocks', () => got.blocks.length === 5);
    expect(got.blocks.map((b) => b.startIndex)).toEqual([0, 1, 2, 3, 12].map((k) => k * SPF));
    expect(got.gaps).toEqual([
      expect.objectContaining({
        fromIndex: 4 * SPF,
        toIndex: 12 * SPF,
        reason: expect.stringMatching(/consumer fell behind: 8 frame\(s\) dropped/),
      }),
    ]);
    expect(src.health()).toMatchObject({ overruns: 8, gaps: 1, samples_lost: 8 * SPF });
    expectExact(got.blocks);
  });

  it('carries a sine and its tach edges through unchanged within the int24 quantisation', async () => {
    const { src, got, w } = await startStreaming({ channels: 2 });
    const signal = new SineTachSignal(
      RATE,
      1485,
      [
        { amp_v: 1.5, lag_deg: 30 },
        { amp_v: 0.2, lag_deg: 120, dc_v: 10 },
      ],
      12.75,
    );
    const scale = [2 ** -22, 2 ** -19];
    const board = new BoardEmulator(signal, {
      sampleRateHz: RATE,
      samplesPerFrame: SPF,
      format: 'int24',
      scaleVPerCount: scale,
      tachTimed: true,
    });
    for (let k = 0; k < 20; k++) await w.write(board.nextFrame());
    await waitFor('20 blocks', () => got.blocks.length === 20);
    const samplesPerRev = (RATE * 60) / 1485;
    let maxErr = [0, 0];
    for (const b of got.blocks) {
      for (let i = 0; i < SPF; i++) {
        const t = b.startIndex + i - 12.75;
        const ref = [
          1.5 * Math.cos((2 * Math.PI * t) / samplesPerRev - Math.PI / 6),
          10 + 0.2 * Math.cos((2 * Math.PI * t) / samplesPerRev - (2 * Math.PI) / 3),
        ];
        for (let c = 0; c < 2; c++)
          maxErr[c] = Math.max(maxErr[c]!, Math.abs(b.channels[c]![i]! - ref[c]!));
      }
    }
    // Half a count of quantisation plus float32 rounding of the volts.
    expect(maxErr[0]).toBeLessThanOrEqual(scale[0]! / 2 + 1.5 * 2 ** -23);
    expect(maxErr[1]).toBeLessThanOrEqual(scale[1]! / 2 + 10.2 * 2 ** -23);
    const edges = got.blocks.flatMap((b) => b.tachEdges);
    expect(edges.length).toBe(Math.floor((20 * SPF - 12.75) / samplesPerRev) + 1);
    edges.forEach((e, k) => expect(e).toBeCloseTo(12.75 + k * samplesPerRev, 6));
  });
});

describe('PortReader: the port read straight from its descriptor', () => {
  // Both ways of reading, on serialport's own Linux binding port: 'poll' (the agent's, chosen by
  // itself wherever the binding has a poller) and 'binding' (its read(), the fallback elsewhere).
  for (const mode of ['poll', 'binding'] as ReadMode[]) {
    it(`${mode}: every byte in order, then the vanished device ends it once as a failure`, async () => {
      await pty.start();
      const port = await SerialPort.binding.open({ path: pty.agentPath, baudRate: 921_600 });
      const chunks: Buffer[] = [];
      const failures: Error[] = [];
      const reader = new PortReader(
        port,
        { data: (c) => chunks.push(Buffer.from(c)), failed: (e) => failures.push(e) },
        { bufferBytes: 4096, mode },
      );
      if (mode === 'poll')
        expect(new PortReader(port, { data() {}, failed() {} }).mode).toBe('poll');
      reader.start();
      writer = await DeviceWriter.open(pty.boardPath);
      const sent = Buffer.from(
        Array.from({ length: 100_000 }, (_, i) => (i * 31 + (i >> 8)) & 0xff),
      );
      for (let o = 0; o < sent.length; o += 7000) await writer.write(sent.subarray(o, o + 7000));
      await waitFor('all bytes', () => chunks.reduce((n, c) => n + c.length, 0) >= sent.length);
      expect(Buffer.concat(chunks).equals(sent)).toBe(true);
      // the 4 KiB buffer is reused: more than 100 000 / 4096 reads
      expect(reader.reads).toBeGreaterThanOrEqual(Math.ceil(sent.length / 4096));
      // Unplug: the pty vanishes with socat; the reader reports it once and calls nothing after.
      await writer.close();
      writer = null;
      await pty.stop();
      await waitFor('the failure', () => failures.length === 1);
      // the poller's own error (libuv's EBADF on the hung-up descriptor), or EIO from the read
      expect(failures[0]!.message).toMatch(/bad file descriptor|EIO/);
      await port.close();
      await new Promise((r) => setTimeout(r, 100));
      expect(failures).toHaveLength(1);
    });
  }

  it('stop(): closing the port afterwards calls the sink no more', async () => {
    await pty.start();
    const port = await SerialPort.binding.open({ path: pty.agentPath, baudRate: 921_600 });
    let calls = 0;
    const reader = new PortReader(port, { data: () => calls++, failed: () => calls++ });
    reader.start();
    reader.stop();
    writer = await DeviceWriter.open(pty.boardPath);
    await writer.write(Buffer.alloc(1000, 7));
    await port.close();
    await new Promise((r) => setTimeout(r, 100));
    expect(calls).toBe(0);
  });

  it('end of file (a hung-up tty reads 0 bytes: POSIX read(2), Linux tty hang-up) is a failure, not a spin', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-eof-'));
    try {
      writeFileSync(join(dir, 'empty'), '');
      const fd = openSync(join(dir, 'empty'), 'r');
      // a port whose poller always says readable, on a descriptor that reads end of file
      const port = {
        isOpen: true,
        fd,
        poller: {
          once: (_e: 'readable', cb: (err: Error | null) => void) => setImmediate(() => cb(null)),
        },
        read: () => Promise.reject(new Error('not used')),
      };
      const failures: Error[] = [];
      let data = 0;
      new PortReader(port, { data: () => data++, failed: (e) => failures.push(e) }).start();
      await new Promise((r) => setTimeout(r, 50));
      closeSync(fd);
      expect(data).toBe(0);
      expect(failures.map((e) => e.message)).toEqual([
        'the device hung up (read returned end of file)',
      ]);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

describe('finding the board', () => {
  it('doubles the reopen delay up to the maximum', () => {
    expect([0, 1, 2, 3, 4, 5, 40].map((a) => reconnectDelayMs(a, 500, 10_000))).toEqual([
      500, 1000, 2000, 4000, 8000, 10_000, 10_000,
    ]);
  });

  it('lists ports without ever throwing, explaining a missing udevadm', async () => {
    let hasUdevadm = true;
    try {
      execFileSync('udevadm', ['--version'], { stdio: 'ignore' });
    } catch {
      hasUdevadm = false;
    }
    const listing = await listPorts('/nonexistent/by-id');
    expect(listing.stable).toEqual([]);
    if (hasUdevadm) expect(listing.listError).toBeNull();
    else
      expect(listing.listError).toMatch(
        /udevadm is not installed.*install the Debian package udev/,
      );
  });
});

describe('turnwise probe-serial', () => {
  it("reports the board's format and counters from a real pty", async () => {
    await pty.start();
    writer = await DeviceWriter.open(pty.boardPath);
    const board = newBoard(777);
    let stop = false;
    const w = writer;
    const playing = playRealtime(board, w, (SPF / RATE) * 1000, () => stop);
    const chunks: string[] = [];
    const spy = vi
      .spyOn(process.stdout, 'write')
      .mockImplementation((s: string | Uint8Array) => (chunks.push(String(s)), true));
    const errSpy = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    let code: number;
    try {
      code = await probeSerialCommand.run([
        '--device',
        pty.agentPath,
        '--seconds',
        '1.5',
        '--json',
      ]);
    } finally {
      spy.mockRestore();
      errSpy.mockRestore();
      stop = true;
    }
    await playing;
    const r = JSON.parse(chunks.join(''));
    expect(code).toBe(0);
    const v1 = {
      protocol_version: 1,
      channels: CHANNELS,
      sample_rate_hz: RATE,
      sample_format: 'int24',
      samples_per_frame: SPF,
      tach_timed: true,
      sample_delay_ticks: null,
      tach_delay_ticks: null,
      max_skew_ticks: null,
    };
    expect(r.format).toEqual(v1);
    expect(r.formats_seen).toEqual([
      { ...v1, frames: r.counters.frames_ok, first_sequence: expect.any(Number) },
    ]);
    expect(r.modem_lines).toMatch(/^(asserted|not supported by the device \(.+\))$/);
    expect(r.counters.frames_ok).toBeGreaterThan(50);
    expect(r.counters.crc_errors).toBe(0);
    // Paced by the emulator's real-time loop; loose bounds, this is a sanity check of the estimate.
    expect(r.measured_rate_hz).toBeGreaterThan(0.75 * RATE);
    expect(r.measured_rate_hz).toBeLessThan(1.25 * RATE);
  });

  it('reports every format and frame size seen, and every gap of a burst with its bounds', async () => {
    await pty.start();
    writer = await DeviceWriter.open(pty.boardPath);
    const w = writer;
    const sig = new RampSignal();
    const mk = (
      format: 'int24' | 'int16' | 'float32',
      spf: number,
      first: number,
      seq: number,
      timing?: { sampleDelayTicks: number; tachDelayTicks: number; skewTicks: number[] },
    ) =>
      new BoardEmulator(sig, {
        sampleRateHz: RATE,
        samplesPerFrame: spf,
        format,
        scaleVPerCount: SCALES,
        offsetV: OFFSETS,
        tachTimed: true,
        firstSample: first,
        firstSequence: seq,
        ...(timing ? { timing } : {}),
      });
    const chunks: string[] = [];
    const spy = vi
      .spyOn(process.stdout, 'write')
      .mockImplementation((s: string | Uint8Array) => (chunks.push(String(s)), true));
    const errSpy = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    let code: number;
    try {
      const probing = probeSerialCommand.run([
        '--device',
        pty.agentPath,
        '--seconds',
        '1.5',
        '--json',
      ]);
      await new Promise((r) => setTimeout(r, 300));
      // int24 x 256, then int16 x 128 with a burst of three single-frame gaps, then version
      // 2 float32 x 512.
      const a = mk('int24', 256, 0, 0);
      for (let i = 0; i < 10; i++) await w.write(a.nextFrame());
      const b = mk('int16', 128, a.nextIndex, a.nextSequence);
      for (let i = 0; i < 12; i++) {
        if (i === 3 || i === 5 || i === 7) b.skipFrame();
        else await w.write(b.nextFrame());
      }
      const c = mk('float32', 512, b.nextIndex, b.nextSequence, {
        sampleDelayTicks: 38,
        tachDelayTicks: 1.5,
        skewTicks: [0, 0.25, 0.5, 0.75],
      });
      for (let i = 0; i < 5; i++) await w.write(c.nextFrame());
      code = await probing;
    } finally {
      spy.mockRestore();
      errSpy.mockRestore();
    }
    const r = JSON.parse(chunks.join(''));
    expect(code).toBe(0);
    const base = { channels: CHANNELS, sample_rate_hz: RATE, tach_timed: true };
    expect(r.formats_seen).toEqual([
      {
        ...base,
        protocol_version: 1,
        sample_format: 'int24',
        samples_per_frame: 256,
        sample_delay_ticks: null,
        tach_delay_ticks: null,
        max_skew_ticks: null,
        frames: 10,
        first_sequence: 0,
      },
      {
        ...base,
        protocol_version: 1,
        sample_format: 'int16',
        samples_per_frame: 128,
        sample_delay_ticks: null,
        tach_delay_ticks: null,
        max_skew_ticks: null,
        frames: 9,
        first_sequence: 10,
      },
      {
        ...base,
        protocol_version: 2,
        sample_format: 'float32',
        samples_per_frame: 512,
        sample_delay_ticks: 38,
        tach_delay_ticks: 1.5,
        max_skew_ticks: 0.75,
        frames: 5,
        first_sequence: 22,
      },
    ]);
    // Each gap of the burst is counted and listed with its exact bounds.
    expect(r.counters.gaps).toBe(3);
    expect(
      r.gap_list.map((g: { from_index: number; to_index: number }) => [g.from_index, g.to_index]),
    ).toEqual([3, 5, 7].map((i) => [2560 + i * 128, 2560 + (i + 1) * 128]));
    expect(r.gap_list[0].reason).toMatch(/sequence jump 12 -> 14 \(1 frame\(s\) missing\)/);
  });

  it('names a missing device and what to do', async () => {
    await expect(
      probeSerialCommand.run(['--device', '/nonexistent/tty-board', '--seconds', '1']),
    ).rejects.toThrow(/\/nonexistent\/tty-board does not exist/);
  });
});

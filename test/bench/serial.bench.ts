/**
 * Serial acquisition throughput: 8 channels x 25.6 kHz x int24 in real time through a real
 * pseudo-terminal (socat) into the real SerialSource, for a fixed wall time. The board emulator
 * runs in a child process so the CPU share measured with process.cpuUsage() is the reader's alone
 * (port reading, decoder, block queue and a consumer that reads every sample).
 * Also measures reading alone, without decoding: the agent's PortReader, and serialport's stream
 * (the path the agent used before, for comparison); and the decoder alone on bytes in memory.
 * As the floor of reading on readiness, a Node timer that only wakes this process as often as the
 * PortReader read, doing nothing else.
 *
 *   npm run build && node dist/test/bench/serial.bench.js [--seconds 20] [--json]
 */
import { fork } from 'node:child_process';
import { parseArgs } from 'node:util';
import { fileURLToPath } from 'node:url';
import {
  BoardEmulator,
  DeviceWriter,
  SineTachSignal,
  playRealtime,
} from '../../drivers/serial/board-emulator.js';
import { FrameDecoder } from '../../drivers/serial/frame.js';
import { silentLogger } from '../../agent/log.js';
import { PortReader } from '../../drivers/serial/port-reader.js';
import { SerialSource } from '../../drivers/serial/serial-source.js';
import { PtyPair } from '../support/pty-pair.js';
import { SerialPort } from 'serialport';

const RATE = 25_600;
const CHANNELS = 8;
const SPF = 256; // 10 ms frames
const SCALE = Array.from({ length: CHANNELS }, () => 2 ** -21);

function makeBoard(): BoardEmulator {
  const chans = Array.from({ length: CHANNELS }, (_, c) => ({
    amp_v: 0.5 + 0.1 * c,
    lag_deg: 40 * c,
    dc_v: c === 6 ? 2 : 0,
  }));
  return new BoardEmulator(new SineTachSignal(RATE, 1485, chans, 3.5), {
    sampleRateHz: RATE,
    samplesPerFrame: SPF,
    format: 'int24',
    scaleVPerCount: SCALE,
    tachTimed: true,
  });
}

/** Child process: plays the board into the pty in real time until told to stop. */
async function boardMain(path: string): Promise<void> {
  const out = await DeviceWriter.open(path);
  let stop = false;
  process.on('message', (m) => {
    if (m === 'stop') stop = true;
  });
  let bytes = 0;
  const counted = { write: (b: Uint8Array) => ((bytes += b.length), out.write(b)) };
  const sent = await playRealtime(makeBoard(), counted, (SPF / RATE) * 1000, () => stop);
  await out.close();
  process.send!({ sent, bytes });
  process.disconnect();
}

function decoderCeiling(): { mb_per_s: number; realtime_factor: number } {
  const board = makeBoard();
  const frames = Array.from({ length: 500 }, () => board.nextFrame());
  const bytes = Buffer.concat(frames);
  let sum = 0;
  const dec = new FrameDecoder({
    frame: (f) => {
      sum += f.channels[0]![0]!;
    },
    gap: () => {},
    problem: () => {},
  });
  const chunk = 4096;
  const rounds = 20;
  const t0 = process.hrtime.bigint();
  for (let r = 0; r < rounds; r++)
    for (let o = 0; o < bytes.length; o += chunk) dec.push(bytes.subarray(o, o + chunk));
  const s = Number(process.hrtime.bigint() - t0) / 1e9;
  if (dec.counters.frames_ok !== 500 * rounds || !Number.isFinite(sum))
    throw new Error('decoder bench decoded wrong');
  const mbPerS = (bytes.length * rounds) / s / 1e6;
  const realtimeBytesPerS = (bytes.length / (500 * SPF)) * RATE;
  return { mb_per_s: mbPerS, realtime_factor: (mbPerS * 1e6) / realtimeBytesPerS };
}

/** CPU share of a timer that wakes this process `perS` times a second and does nothing else. */
async function wakeFloor(
  perS: number,
  seconds: number,
): Promise<{ wakeups_per_s: number; cpu_percent_of_one_core: number }> {
  let n = 0;
  let stop = false;
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  // On a schedule that does not drift (timers have whole milliseconds).
  const tick = () => {
    if (stop) return;
    n++;
    setTimeout(tick, Math.max(0, t0 + ((n + 1) * 1000) / perS - performance.now()));
  };
  setTimeout(tick, 1000 / perS);
  await new Promise((r) => setTimeout(r, seconds * 1000));
  const cpu = process.cpuUsage(cpu0);
  const wallS = (performance.now() - t0) / 1000;
  stop = true;
  return {
    wakeups_per_s: n / wallS,
    cpu_percent_of_one_core: (100 * (cpu.user + cpu.system)) / 1e6 / wallS,
  };
}

interface Measured {
  wall_s: number;
  cpu_user_s: number;
  cpu_system_s: number;
  frames_sent: number;
  bytes_sent: number;
  /** Frames received (source) or bytes received (reader, stream). */
  received: number;
  samples_per_s: number;
  gaps: number;
  crc_errors: number;
  overruns: number;
  tach_edges: number;
  heap_growth_mb: number;
  /** read() calls that returned bytes, per second (reader and stream). */
  reads_per_s: number;
}

type Kind = 'source' | 'reader' | 'stream';

/**
 * Plays the board in a child process into a fresh pty for `seconds` (after a 1 s settling time)
 * while this process reads: `source` = the whole SerialSource with a consumer that reads every
 * sample; `reader` = the PortReader alone (the agent's floor); `stream` = serialport's own stream
 * alone (how the agent read before).
 */
async function measure(kind: Kind, seconds: number): Promise<Measured> {
  const pty = new PtyPair();
  try {
    await pty.start();
    return await measureOn(pty, kind, seconds);
  } finally {
    await pty.dispose(); // never leave socat running, whatever happened
  }
}

async function measureOn(pty: PtyPair, kind: Kind, seconds: number): Promise<Measured> {
  let samples = 0;
  let bytes = 0;
  let reads = 0;
  let gaps = 0;
  let edges = 0;
  let checksum = 0;
  let source: SerialSource | null = null;
  let stream: SerialPort | null = null;
  let reader: { stop(): void; close(): Promise<void> } | null = null;
  let consumer: Promise<void> = Promise.resolve();
  if (kind === 'source') {
    source = new SerialSource({
      device: pty.agentPath,
      baud: 921_600,
      sampleRateHz: RATE,
      channels: CHANNELS,
      reconnectMinMs: 200,
      reconnectMaxMs: 2000,
      stallTimeoutMs: 5000,
      queueFrames: 256,
      maxFrameBytes: 262_144,
      log: silentLogger,
    });
    await source.open();
    while (!source.health().connected) await new Promise((r) => setTimeout(r, 10));
    const src = source;
    consumer = (async () => {
      for await (const it of src.items()) {
        if (it.kind === 'gap') {
          gaps++;
          continue;
        }
        for (const ch of it.channels) for (let i = 0; i < ch.length; i++) checksum += ch[i]!;
        samples += it.channels[0]!.length;
        edges += it.tachEdges?.length ?? 0;
      }
    })();
  } else if (kind === 'reader') {
    const port = await SerialPort.binding.open({ path: pty.agentPath, baudRate: 921_600 });
    const r = new PortReader(port, {
      data: (d) => {
        bytes += d.length;
        reads++;
      },
      failed: (e) => {
        throw e;
      },
    });
    if (r.mode !== 'poll') throw new Error(`PortReader read by ${r.mode}, not by polling`);
    r.start();
    reader = { stop: () => r.stop(), close: () => port.close() };
  } else {
    const port = new SerialPort({ path: pty.agentPath, baudRate: 921_600, autoOpen: false });
    await new Promise<void>((res, rej) => port.open((e) => (e ? rej(e) : res())));
    port.on('data', (d: Buffer) => {
      bytes += d.length;
      reads++;
    });
    stream = port;
  }

  const child = fork(fileURLToPath(import.meta.url), ['--board', pty.boardPath], {
    stdio: ['ignore', 'inherit', 'inherit', 'ipc'],
  });
  const sentP = new Promise<{ sent: number; bytes: number }>((res) =>
    child.on('message', (m: { sent: number; bytes: number }) => res(m)),
  );
  await new Promise((r) => setTimeout(r, 1000));
  process.stderr.write(
    `serial bench (${kind}): measuring ${seconds} s of ` +
      `8 ch x 25.6 kHz x int24 through ${pty.agentPath}...\n`,
  );
  const samples0 = samples;
  const bytes0 = bytes;
  const reads0 = reads;
  const heap0 = process.memoryUsage().heapUsed;
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  await new Promise((r) => setTimeout(r, seconds * 1000));
  const cpu = process.cpuUsage(cpu0);
  const wallS = (performance.now() - t0) / 1000;
  const samplesPerS =
    kind === 'source' ? (samples - samples0) / wallS : (bytes - bytes0) / (CHANNELS * 3) / wallS;
  const readsPerS = (reads - reads0) / wallS;
  const heap1 = process.memoryUsage().heapUsed;

  child.send('stop');
  const { sent, bytes: bytesSent } = await sentP;
  // Whatever was sent must arrive: wait for the tail.
  const tEnd = Date.now();
  const arrived = () => (kind === 'source' ? samples >= sent * SPF : bytes >= bytesSent);
  while (!arrived() && Date.now() - tEnd < 3000) await new Promise((r) => setTimeout(r, 20));
  const h = source?.health();
  await source?.close();
  if (stream) await new Promise<void>((res) => stream!.close(() => res()));
  if (reader) {
    reader.stop();
    await reader.close();
  }
  await consumer;
  if (!Number.isFinite(checksum)) throw new Error('non-finite samples');
  return {
    wall_s: wallS,
    cpu_user_s: cpu.user / 1e6,
    cpu_system_s: cpu.system / 1e6,
    frames_sent: sent,
    bytes_sent: bytesSent,
    received: h ? h.frames_ok : bytes,
    samples_per_s: samplesPerS,
    gaps,
    crc_errors: h?.crc_errors ?? 0,
    overruns: h?.overruns ?? 0,
    tach_edges: edges,
    heap_growth_mb: (heap1 - heap0) / 1e6,
    reads_per_s: readsPerS,
  };
}

const cpuPercent = (m: Measured) => (100 * (m.cpu_user_s + m.cpu_system_s)) / m.wall_s;

async function main(): Promise<void> {
  const { values } = parseArgs({
    options: { seconds: { type: 'string', default: '20' }, json: { type: 'boolean' } },
  });
  const seconds = Number(values.seconds);
  if (!(seconds > 0)) throw new Error('--seconds must be a positive number');

  process.stderr.write('serial bench: decoder alone on bytes in memory...\n');
  const ceiling = decoderCeiling();
  const src = await measure('source', seconds);
  const readerM = await measure('reader', seconds);
  const streamM = await measure('stream', seconds);
  process.stderr.write(
    `serial bench: a timer waking ${readerM.reads_per_s.toFixed(0)} times ` +
      `a second for ${seconds} s...\n`,
  );
  const floor = await wakeFloor(readerM.reads_per_s, seconds);
  const keepsUp =
    src.received === src.frames_sent &&
    src.gaps === 0 &&
    src.overruns === 0 &&
    readerM.received === readerM.bytes_sent;
  const result = {
    stream: {
      channels: CHANNELS,
      sample_rate_hz: RATE,
      format: 'int24',
      samples_per_frame: SPF,
      payload_bytes_per_s: RATE * CHANNELS * 3,
    },
    keeps_up: keepsUp,
    source: { ...src, cpu_percent_of_one_core: cpuPercent(src) },
    port_reader_only: { ...readerM, cpu_percent_of_one_core: cpuPercent(readerM) },
    serialport_stream_only: { ...streamM, cpu_percent_of_one_core: cpuPercent(streamM) },
    timer_wakeups_only: floor,
    decoder_alone_mb_per_s: ceiling.mb_per_s,
    decoder_alone_x_realtime: ceiling.realtime_factor,
    node: process.version,
  };
  if (values.json) process.stdout.write(JSON.stringify(result, null, 2) + '\n');
  else {
    const rows: [string, string][] = [
      [
        'stream',
        `${CHANNELS} ch x ${RATE} Hz x int24, ${SPF} samples/frame ` +
          `(${((RATE * CHANNELS * 3) / 1e3).toFixed(1)} kB/s of samples)`,
      ],
      ['measured', `${src.wall_s.toFixed(1)} s wall per run`],
      ['keeps up', keepsUp ? 'yes' : 'NO'],
      ['frames sent / received', `${src.frames_sent} / ${src.received}`],
      ['bytes sent / received (PortReader)', `${readerM.bytes_sent} / ${readerM.received}`],
      ['samples received', `${src.samples_per_s.toFixed(0)} /s per channel during the measurement`],
      ['gaps, crc errors, overruns', `${src.gaps}, ${src.crc_errors}, ${src.overruns}`],
      [
        'reader CPU (SerialSource)',
        `${cpuPercent(src).toFixed(2)} % of one core (user ` +
          `${src.cpu_user_s.toFixed(2)} s, system ${src.cpu_system_s.toFixed(2)} s)`,
      ],
      [
        'PortReader alone',
        `${cpuPercent(readerM).toFixed(2)} % of one core (no ` +
          `decoding; ${readerM.reads_per_s.toFixed(0)} reads/s)`,
      ],
      [
        'serialport stream alone',
        `${cpuPercent(streamM).toFixed(2)} % of one core (no decoding; ` +
          `${streamM.reads_per_s.toFixed(0)} reads/s; the agent's former path)`,
      ],
      [
        'timer waking as often, alone',
        `${floor.cpu_percent_of_one_core.toFixed(2)} % of one core ` +
          `(${floor.wakeups_per_s.toFixed(0)} wake-ups/s, nothing read)`,
      ],
      ['heap growth (SerialSource)', `${src.heap_growth_mb.toFixed(2)} MB`],
      [
        'decoder alone',
        `${ceiling.mb_per_s.toFixed(0)} MB/s = ${ceiling.realtime_factor.toFixed(0)} x real time`,
      ],
    ];
    const w = Math.max(...rows.map((r) => r[0].length));
    process.stdout.write(rows.map(([k, v]) => `${k.padEnd(w)}  ${v}`).join('\n') + '\n');
  }
  process.exitCode = keepsUp ? 0 : 1;
}

const boardArg = process.argv.indexOf('--board');
if (boardArg >= 0) await boardMain(process.argv[boardArg + 1]!);
else await main();

import { describe, expect, it } from 'vitest';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { RawRing } from '../agent/capture/raw-ring.js';
import { ManualClock } from '../agent/clock.js';
import { validateConfig } from '../agent/config/load.js';
import type { WindowResult } from '../agent/dsp/types.js';
import type { AgentEvent } from '../agent/events.js';
import { MemoryLogger } from '../agent/log.js';
import { Agent } from '../agent/runtime/agent.js';
import { WavSource } from '../drivers/wav/reader.js';
import { ArraySource } from './support/array-source.js';
import { runCli } from './support/cli.js';
import { synthesize } from './support/synth.js';
import { fillUp, tryMountTmpfs, unmountTmpfs } from './support/tmpfs.js';

/**
 * Event captures: the raw samples around every alarm (and on command) written as a WAV recording
 * with the config that analyses it, bounded in count and bytes, surviving a full disk.
 */

describe('RawRing', () => {
  it('gives back exactly the samples written, across wrap-around and odd block sizes', () => {
    const ring = new RawRing(2, 1000);
    const n = 5000;
    const src = [
      Float32Array.from({ length: n }, (_, i) => i),
      Float32Array.from({ length: n }, (_, i) => -i),
    ];
    let i = 0;
    for (const b of [7, 333, 1000, 1, 999, 1500, 1160]) {
      ring.write(
        src.map((c) => c.subarray(i, i + b)),
        i,
      );
      i += b;
    }
    expect(i).toBe(n);
    expect(ring.end).toBe(n);
    expect(ring.start).toBe(n - 1000);
    const out = [new Float32Array(600), new Float32Array(600)];
    ring.copy(n - 700, n - 100, out);
    expect(Array.from(out[0]!.subarray(0, 3))).toEqual([n - 700, n - 699, n - 698]);
    expect(out[0]![599]).toBe(n - 101);
    expect(out[1]![599]).toBe(-(n - 101));
    expect(() => ring.copy(n - 1001, n, [new Float32Array(1001), new Float32Array(1001)])).toThrow(
      /not held/,
    );
  });

  it('a block that does not follow the last one (a gap) starts a new run: nothing older is handed out', () => {
    const ring = new RawRing(1, 1000);
    ring.write([new Float32Array(500).fill(1)], 0);
    ring.write([new Float32Array(100).fill(2)], 700);
    expect(ring.start).toBe(700);
    expect(ring.end).toBe(800);
  });
});

const fs = 5120;
const step = 20;

/**
 * A fan in zone B for 20 s whose unbalance then grows into zone D (ISO 20816-3 group 2 rigid: C/D
 * 4.5 mm/s r.m.s.).
 */
function fanSignal(seconds: number): Float32Array[] {
  const ch = (before: number, after: number, phase: number) => ({
    orders: [
      { order: 1, velPk: before, phaseDeg: phase, untilS: step },
      { order: 1, velPk: after, phaseDeg: phase, fromS: step },
    ],
    noiseMmS2: 50,
  });
  return synthesize({
    sampleRate: fs,
    seconds,
    rpm: () => 1485,
    channels: [ch(2, 9, 40), ch(1.8, 8, 130)],
    tachChannel: 2,
  });
}

function fanConfig(stateDir: string, capture: Record<string, unknown> = {}) {
  return validateConfig({
    machine: { id: 'kessrow-id3a', group: 2, support: 'rigid', rated_rpm: 1485 },
    tach: { channel: 2, trigger_v: 2.5 },
    sensors: [
      { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
      { id: 'DE-H', channel: 1, bearing: 'DE', direction: 'horizontal', sensitivity_mv_per_g: 100 },
    ],
    state_dir: stateDir,
    watcher: { window_s: 2, on_delay_s: 4 },
    capture,
  });
}

describe('event captures in the agent', () => {
  it('an alarm writes a capture named by the event; analyze reads it back with the live 1x (1 %, 1 degree)', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-capture-'));
    const cfg = fanConfig(join(dir, 'state'), { pre_s: 4, post_s: 3 });
    const events: AgentEvent[] = [];
    const windows: WindowResult[] = [];
    const t0 = Date.UTC(2026, 11, 3, 6, 0, 0);
    const agent = new Agent({
      config: cfg,
      source: new ArraySource(fanSignal(40), fs, 2048),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: new MemoryLogger(),
      startMs: t0,
      onEvent: (e) => events.push(e),
      windowConsumers: [{ onWindow: (w) => void windows.push(w) }],
    });
    await agent.run();
    const alarm = events.find((e) => e.severity === 'alarm' && e.type === 'zone_changed');
    expect(alarm).toBeDefined();
    const id = alarm!.capture_id as string;
    expect(id).toMatch(/^\d{8}T\d{6}Z-\d+$/);
    // Events below alarm severity carry no capture.
    expect(
      events.filter((e) => e.severity !== 'alarm').every((e) => e.capture_id === undefined),
    ).toBe(true);
    const capDir = join(dir, 'state', 'captures');
    const rec = JSON.parse(readFileSync(join(capDir, `${id}.json`), 'utf8'));
    expect(rec.reason).toBe('zone_changed');
    expect(rec.event_id).toBe(alarm!.id);
    expect(rec.pre_s).toBeCloseTo(4, 3);
    expect(rec.post_s).toBeCloseTo(3, 3);
    expect(rec.ts).toBe(alarm!.ts);
    // The WAV holds every source channel (2 sensors + tach) for 7 s, float32 volts.
    const wav = new WavSource(join(capDir, rec.wav), {});
    const info = await wav.open();
    expect(info.channelCount).toBe(3);
    expect(info.sampleRate).toBe(fs);
    expect(info.totalSamples).toBe(7 * fs);
    await wav.close();
    // Read back by the product as any recording, with the config written beside it.
    const r = runCli([
      'analyze',
      join(capDir, rec.wav),
      '--config',
      join(capDir, rec.config),
      '--json',
    ]);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const a = JSON.parse(r.stdout);
    // The live measurement of the same stretch: the agent's last window (zone D throughout after
    // 20 s).
    const last = windows[windows.length - 1]!;
    for (const c of ['DE-V', 'DE-H']) {
      const live = last.channels.find((x) => x.id === c)!.orders['1']!;
      const got = a.channels.find((x: { id: string }) => x.id === c).orders['1'];
      expect(Math.abs(got.amp_pk_mm_s / live.amp_pk_mm_s - 1)).toBeLessThan(0.01);
      expect(Math.abs(((got.phase_deg - live.phase_deg + 540) % 360) - 180)).toBeLessThan(1);
    }
    // And it is the zone-D signal the synthesizer made: 9 mm/s pk at 40 degrees on DE-V.
    expect(a.channels[0].orders['1'].amp_pk_mm_s).toBeCloseTo(9, 0);
    rmSync(dir, { recursive: true, force: true });
  });

  it('captures on command; count bound keeps the newest, the oldest removed first; incomplete ones are removed at start', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-capture-bound-'));
    const cfg = fanConfig(join(dir, 'state'), { pre_s: 1, post_s: 1, max_count: 2 });
    const ids: string[] = [];
    let agent!: Agent;
    let n = 0;
    const t0 = Date.UTC(2026, 11, 3, 7, 0, 0);
    agent = new Agent({
      config: cfg,
      // zone B throughout: no alarm, only the commanded captures
      source: new ArraySource(
        fanSignal(16).map((c) => c.subarray(0, 16 * fs)),
        fs,
        2048,
      ),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: new MemoryLogger(),
      startMs: t0,
      windowConsumers: [
        {
          onWindow: async () => {
            if (++n % 2 === 0 && ids.length < 3)
              ids.push((await agent.handlers.takeCapture!({}))['capture_id'] as string);
          },
        },
      ],
    });
    const sum = await agent.run();
    expect(sum.windows).toBe(8);
    expect(ids).toHaveLength(3);
    const capDir = join(dir, 'state', 'captures');
    const files = readdirSync(capDir).sort();
    expect(files).toEqual(
      [ids[1], ids[2]].flatMap((id) => [`${id}.json`, `${id}.wav`, `${id}.yaml`]).sort(),
    );
    expect(agent.health()['captures_removed']).toBe(1);
    expect(agent.health()['captures_written']).toBe(3);
    // A capture cut short (its JSON record never written) goes at the next start.
    rmSync(join(capDir, `${ids[2]}.json`));
    const again = new Agent({
      config: cfg,
      source: new ArraySource(fanSignal(3), fs, 2048),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: new MemoryLogger(),
      startMs: t0,
    });
    await again.run();
    expect(existsSync(join(capDir, `${ids[2]}.wav`))).toBe(false);
    expect(existsSync(join(capDir, `${ids[1]}.wav`))).toBe(true);
    rmSync(dir, { recursive: true, force: true });
  });

  it('captures that would pass max_mb remove the oldest first', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-capture-mb-'));
    // 2 s x 3 channels x 5120 Hz x 4 bytes = 123 kB per capture (the last one, cut short by the end
    // of the record, 1 s = 61 kB): 0.25 MiB = 262 kB holds two of them, never three.
    const cfg = fanConfig(join(dir, 'state'), { pre_s: 1, post_s: 1, max_count: 50, max_mb: 0.25 });
    let agent!: Agent;
    let n = 0;
    const t0 = Date.UTC(2026, 11, 3, 8, 0, 0);
    agent = new Agent({
      config: cfg,
      source: new ArraySource(
        fanSignal(16).map((c) => c.subarray(0, 16 * fs)),
        fs,
        2048,
      ),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: new MemoryLogger(),
      startMs: t0,
      windowConsumers: [
        { onWindow: async () => void (++n % 2 === 0 && (await agent.handlers.takeCapture!({}))) },
      ],
    });
    await agent.run();
    const wavs = readdirSync(join(dir, 'state', 'captures')).filter((f) => f.endsWith('.wav'));
    expect(agent.health()['captures_written']).toBe(4);
    expect(wavs).toHaveLength(2);
    rmSync(dir, { recursive: true, force: true });
  });
});

describe('event captures on a full disk', () => {
  const mnt = tryMountTmpfs();
  it.skipIf(mnt === null)(
    'a capture that cannot be written is logged once per burst and monitoring goes on',
    async () => {
      const stateDir = join(mnt!, 'state');
      const cfg = fanConfig(stateDir, { pre_s: 1, post_s: 1 });
      const log = new MemoryLogger();
      let agent!: Agent;
      let n = 0;
      const t0 = Date.UTC(2026, 11, 3, 9, 0, 0);
      const ballast = fillUp(mnt!);
      try {
        agent = new Agent({
          config: cfg,
          source: new ArraySource(
            fanSignal(16).map((c) => c.subarray(0, 16 * fs)),
            fs,
            2048,
          ),
          boardTimesTach: false,
          clock: new ManualClock(t0),
          logger: log,
          startMs: t0,
          windowConsumers: [
            {
              onWindow: async () => void (++n % 2 === 0 && (await agent.handlers.takeCapture!({}))),
            },
          ],
        });
        const sum = await agent.run();
        expect(sum.windows).toBe(8);
        expect(agent.health()['captures_failed']).toBe(4);
        expect(agent.health()['captures_written']).toBe(0);
        const lines = log.lines.filter(
          (l) => l.level === 'warn' && /capture .* could not be written/.test(l.msg),
        );
        expect(lines).toHaveLength(1);
        expect(lines[0]!.msg).toMatch(/ENOSPC|EDQUOT/);
        expect(lines[0]!.msg).toContain('monitoring goes on');
      } finally {
        rmSync(ballast.ballast, { force: true });
        unmountTmpfs(mnt!);
      }
    },
  );
});

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
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
import { ManualClock } from '../agent/clock.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { validateConfig } from '../agent/config/load.js';
import type { AgentEvent } from '../agent/events.js';
import { MemoryLogger } from '../agent/log.js';
import { Agent } from '../agent/runtime/agent.js';
import { ArraySource } from './support/array-source.js';
import { FakeGpioLines } from '../drivers/gpio/fake-lines.js';
import type { SerialHealth } from '../drivers/serial/serial-source.js';
import type { SampleSource, SourceInfo, SourceItem } from '../drivers/source.js';
import { plainBroker } from './support/mosquitto.js';
import { assertMatches } from './support/payload-schemas.js';
import { TestSubscriber } from './support/subscriber.js';
import { synthesize } from './support/synth.js';
import { fillUp, tryMountTmpfs, unmountTmpfs } from './support/tmpfs.js';

/**
 * The whole agent on a synthesized fan: source -> DSP -> watcher -> outbox/MQTT (real mosquitto)
 * and the local advisory (fake GPIO lines, the only fake: there are no GPIO lines here).
 * The fan runs in zone B for 20 s, then its unbalance grows into zone D (ISO 20816-3 group 2 rigid:
 * C/D = 4.5 mm/s r.m.s.) at both bearings.
 */
describe('turnwise agent end to end', () => {
  let broker: { url: string; dispose(): Promise<void> };
  beforeAll(async () => {
    broker = await plainBroker();
  });
  afterAll(async () => {
    await broker?.dispose();
  });

  it('publishes zone, unbalance and advisory events and drops the relay on danger at one bearing', async () => {
    const fs = 5120;
    const step = 20;
    const ch = (pkBefore: number, pkAfter: number, phase: number) => ({
      orders: [
        { order: 1, velPk: pkBefore, phaseDeg: phase, untilS: step },
        { order: 1, velPk: pkAfter, phaseDeg: phase, fromS: step },
      ],
      noiseMmS2: 50,
    });
    // Static unbalance: bearings in phase, H 90 deg behind V (common practice).
    const sig = synthesize({
      sampleRate: fs,
      seconds: 70,
      rpm: () => 1485,
      channels: [ch(2, 9, 40), ch(1.8, 8, 130), ch(2, 8.5, 45), ch(1.7, 7.5, 135)],
      tachChannel: 4,
    });
    const dir = mkdtempSync(join(tmpdir(), 'tw-agent-'));
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const cfg = validateConfig({
      machine: { id: 'kessrow-id3a', group: 2, support: 'rigid', rated_rpm: 1485 },
      tach: { channel: 4, trigger_v: 2.5 },
      sensors: [
        { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
        {
          id: 'DE-H',
          channel: 1,
          bearing: 'DE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
        {
          id: 'NDE-V',
          channel: 2,
          bearing: 'NDE',
          direction: 'vertical',
          sensitivity_mv_per_g: 100,
        },
        {
          id: 'NDE-H',
          channel: 3,
          bearing: 'NDE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
      ],
      state_dir: join(dir, 'state'),
      mqtt: { url: broker.url, topic_prefix: prefix },
      advisory: { relay: { line: 17 }, lamp: { line: 27 } },
      watcher: { window_s: 5, on_delay_s: 10 },
    });
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/#`]);
    const gpio = new FakeGpioLines();
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const log = new MemoryLogger();
    const agent = new Agent({
      config: cfg,
      source: new ArraySource(sig, fs, 2048, [], 15),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: log,
      gpio,
      startMs: t0,
    });
    const sum = await agent.run(10_000);
    expect(sum.drained).toBe(true);
    expect(sum.windows).toBe(14);
    const base = `${prefix}/kessrow-id3a`;
    await sub.waitFor(
      (m) => m.some((x) => x.topic === `${base}/event/advisory_raised`),
      10_000,
      'advisory_raised',
    );
    const events = sub.messages.filter((m) => m.topic.startsWith(`${base}/event/`));
    for (const e of events)
      assertMatches(
        e.topic.includes('/event/advisory_') ? 'event-advisory.v1' : 'event.v1',
        e.json,
      );
    const types = events.map((e) => (e.json as { type: string }).type);
    expect(types).toContain('zone_changed');
    expect(types).toContain('unbalance_found');
    const zoneD = events
      .map((e) => e.json as { type: string; zone?: string; ts: string })
      .find((e) => e.type === 'zone_changed' && e.zone === 'D');
    expect(zoneD).toBeDefined();
    // Times follow the data: zone D is confirmed after the step (20 s) plus the 10 s on-delay.
    const tD = (Date.parse(zoneD!.ts) - t0) / 1000;
    expect(tD).toBeGreaterThanOrEqual(step + 10);
    expect(tD).toBeLessThanOrEqual(step + 10 + 2 * 5);
    // The advisory's events sit on the same (data) time line, although this wall clock never moves:
    // raised once zone D held on both DE channels for the default 3 s, at a window's end.
    const raised = events
      .map((e) => e.json as { type: string; ts: string })
      .find((e) => e.type === 'advisory_raised')!;
    const tRaised = (Date.parse(raised.ts) - t0) / 1000;
    expect(tRaised).toBeGreaterThanOrEqual(tD);
    expect(tRaised).toBeLessThanOrEqual(tD + 3 + 5);
    const unb = events
      .map((e) => e.json as { type: string; kind?: string; evidence?: string[] })
      .find((e) => e.type === 'unbalance_found')!;
    expect(unb.kind).toBe('static');
    expect(unb.evidence!.length).toBeGreaterThan(0);
    // Ids are unique.
    expect(new Set(events.map((e) => (e.json as { id: string }).id)).size).toBe(events.length);
    // Fail-safe outputs: energised while all was well, de-energised once the advisory was raised.
    expect(gpio.writes('advisory relay')).toContain(true);
    expect(gpio.level('advisory relay')).toBe(false);
    const live = sub.on(`${base}/live`);
    expect(live.length).toBeGreaterThan(0);
    for (const m of live) assertMatches('live.v1', m.json);
    await sub.close();
  });

  it('publishes window, gap, source and GPIO speed counters in the heartbeat, and warns once per speed disagreement', async () => {
    const fs = 5120;
    const rpm = 1485;
    const sig = synthesize({
      sampleRate: fs,
      seconds: 30,
      rpm: () => rpm,
      channels: [
        { orders: [{ order: 1, velPk: 2, phaseDeg: 40 }], noiseMmS2: 50 },
        { orders: [{ order: 1, velPk: 1.8, phaseDeg: 130 }], noiseMmS2: 50 },
      ],
      tachChannel: 2,
    });
    const dir = mkdtempSync(join(tmpdir(), 'tw-agent-hb-'));
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const cfg = validateConfig({
      machine: { id: 'kessrow-id3a', group: 2, support: 'rigid', rated_rpm: rpm },
      tach: { channel: 2, trigger_v: 2.5 },
      sensors: [
        { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
        {
          id: 'DE-H',
          channel: 1,
          bearing: 'DE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
      ],
      state_dir: join(dir, 'state'),
      mqtt: { url: broker.url, topic_prefix: prefix, heartbeat_s: 1 },
      advisory: { relay: { line: 17 } },
      gpio: { tach_speed: { line: 23 } },
      watcher: { window_s: 2 },
    });
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const clock = new ManualClock(t0);
    const gpio = new FakeGpioLines();
    // The GPIO pickup reads 10 % fast from 10 s to 20 s (say a second mark on the shaft near the
    // pickup), while the tach channel stays right: 1485 r/min throughout.
    const gpioRpm = (t: number) => (t >= 10 && t < 20 ? rpm * 1.1 : rpm);
    let release!: () => void;
    const hold = new Promise<void>((r) => (release = r));
    let reachedPause!: () => void;
    const paused = new Promise<void>((r) => (reachedPause = r));
    const source = new BoardLikeSource(
      sig,
      fs,
      2048,
      [
        [4 * fs, 4 * fs + 1024],
        [24 * fs, 24 * fs + 512],
      ],
      {
        onBlockEnd: (endS, pulses) => {
          for (const t of pulses(gpioRpm)) gpio.pulse('gpio tach', t0 + t * 1000);
          clock.set(t0 + endS * 1000); // the wall clock runs with the samples, as on the board
        },
        pauseAtS: 16,
        paused: () => reachedPause(),
        hold,
      },
    );
    const seen: WindowResult[] = [];
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/#`]);
    const log = new MemoryLogger();
    const agent = new Agent({
      config: cfg,
      source,
      boardTimesTach: false,
      clock,
      logger: log,
      gpio,
      startMs: t0,
      windowConsumers: [{ onWindow: (w) => void seen.push(w) }],
    });
    const running = agent.run(10_000);
    await paused;

    // While the source holds at 16 s, the next heartbeat reports exactly what has happened so far.
    const base = `${prefix}/kessrow-id3a`;
    type Hb = { agent: Record<string, unknown> };
    const windowsNow = seen.length;
    expect(windowsNow).toBeGreaterThanOrEqual(7);
    await sub.waitFor(
      (m) =>
        m.some(
          (x) => x.topic === `${base}/heartbeat` && (x.json as Hb).agent['windows'] === windowsNow,
        ),
      10_000,
      `a heartbeat with windows ${windowsNow}`,
    );
    const hb = sub
      .on(`${base}/heartbeat`)
      .find((x) => (x.json as Hb).agent['windows'] === windowsNow)!.json as Hb;
    assertMatches('heartbeat.v1', hb);
    const last = seen.at(-1)!;
    expect(last.revolutions).toBeGreaterThan(40); // 2 s at 1485 r/min is 49.5 turns
    expect(hb.agent).toMatchObject({
      windows: windowsNow, // a count, not a flag
      gaps: 1, // the gap at 4 s; the one at 24 s is still ahead
      last_window_revolutions: last.revolutions,
      last_window_revolutions_rejected: last.revolutions_rejected,
      last_window_speed_rpm: Math.round(last.speed_rpm! * 10) / 10,
      // The source's own counters, prefixed, read when the heartbeat goes out.
      time_anchors: 1, // a source without arrival times: anchored once, at its start time
      source_device: '/dev/turnwise-daq',
      source_connected: true,
      source_frames_ok: source.blocksSent,
      source_gaps: 1,
      source_last_gap_from_index: 4 * fs,
      source_last_gap_to_index: 4 * fs + 1024,
      source_samples_lost: 1024,
      source_crc_errors: 3,
      source_stalls: 1,
      source_reconnects: 1,
      gpio_speed_check: 'mismatch',
      advisory_state: 'normal',
    });
    expect(hb.agent['gpio_speed_rpm'] as number).toBeCloseTo(rpm * 1.1, 0);
    expect(hb.agent['gpio_speed_disagreements_total'] as number).toBeGreaterThanOrEqual(2);
    // Every field the agent publishes is declared in the committed schema (so subscribers see its
    // type).
    const schema = JSON.parse(
      readFileSync(
        join(import.meta.dirname, '..', 'config', 'schemas', 'mqtt', 'heartbeat.v1.schema.json'),
        'utf8',
      ),
    ) as { properties: { agent: { properties: Record<string, unknown> } } };
    const declared = Object.keys(schema.properties.agent.properties);
    expect(Object.keys(hb.agent).filter((k) => !declared.includes(k))).toEqual([]);

    release();
    const sum = await running;
    expect(sum.gaps).toBe(2);
    expect(sum.windows).toBe(seen.length);
    // One warning for the whole disagreement (windows ending 12 to 20 s), one line when it ends.
    const lines = log.lines.filter((l) => l.fields['problem'] === 'gpio_speed_check');
    expect(lines.map((l) => l.level)).toEqual(['warn', 'info']);
    expect(lines[0]!.msg).toMatch(
      /^the GPIO tach input says 1633\.5 r\/min, the tach channel 148\d\.\d r\/min \(.* r\/min in the window\): \+10\.\d %, beyond gpio\.tach_speed\.tolerance_pct \(5 %\)/,
    );
    expect(lines[1]!.msg).toMatch(/agree again/);
    expect(lines[1]!.fields['occurrences']).toBeGreaterThanOrEqual(4);
    expect(gpio.isClosed('gpio tach')).toBe(true);
    await sub.close();
  });
});

/**
 * The agent on a state directory in trouble: no MQTT, no advisory, only the watcher's own files.
 * The fan runs 40 s in zone D (9 mm/s peak 1x = 6.4 mm/s r.m.s. > C/D 4.5 mm/s, ISO 20816-3 group
 * 2 rigid).
 */
describe('turnwise agent on a faulty state directory', () => {
  const fs = 5120;
  const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
  function agentOn(stateDir: string, log: MemoryLogger, events: AgentEvent[]): Agent {
    const sig = synthesize({
      sampleRate: fs,
      seconds: 40,
      rpm: () => 1485,
      channels: [
        { orders: [{ order: 1, velPk: 9, phaseDeg: 40 }], noiseMmS2: 50 },
        { orders: [{ order: 1, velPk: 8, phaseDeg: 130 }], noiseMmS2: 50 },
      ],
      tachChannel: 2,
    });
    const config = validateConfig({
      machine: { id: 'kessrow-id3a', group: 2, support: 'rigid', rated_rpm: 1485 },
      tach: { channel: 2, trigger_v: 2.5 },
      sensors: [
        { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
        {
          id: 'DE-H',
          channel: 1,
          bearing: 'DE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
      ],
      state_dir: stateDir,
      watcher: { window_s: 5, on_delay_s: 5, history: { interval_s: 10 } },
    });
    return new Agent({
      config,
      source: new ArraySource(sig, fs, 2048),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: log,
      startMs: t0,
      onEvent: (e) => events.push(e),
    });
  }
  const problemWarnings = (log: MemoryLogger, key: string) =>
    log.lines.filter((l) => l.level === 'warn' && l.fields['problem'] === key);

  it('starts on a full state directory (a real 64 KiB tmpfs) and keeps producing windows and events (needs root to mount)', async (ctx) => {
    const mnt = tryMountTmpfs();
    if (!mnt)
      return ctx.skip(
        'cannot mount a tmpfs here (not root or no CAP_SYS_ADMIN); ' +
          'test/watcher-live.test.ts covers the same path with EISDIR',
      );
    try {
      const stateDir = join(mnt, 'state');
      mkdirSync(join(stateDir, 'watcher'), { recursive: true });
      expect(fillUp(mnt).code).toBe('ENOSPC');
      const log = new MemoryLogger();
      const events: AgentEvent[] = [];
      const agent = agentOn(stateDir, log, events); // used to die here: ENOSPC, exit 70
      const sum = await agent.run();
      expect(sum.windows).toBe(8);
      expect(
        events.map((e) => `${e.type}:${(e['sensor'] as string | undefined) ?? 'machine'}`),
      ).toContain('zone_changed:machine');
      expect(
        events.find((e) => e.type === 'zone_changed' && e['scope'] === 'machine'),
      ).toMatchObject({ zone: 'D', severity: 'alarm' });
      expect(agent.status!.warnings.join('\n')).toMatch(
        /confirmed states not saved: ENOSPC[\s\S]*history not saved: ENOSPC/,
      );
      // Once per burst, not once per window (8 windows, 3 history points).
      expect(problemWarnings(log, 'confirmed states not saved')).toHaveLength(1);
      expect(problemWarnings(log, 'history not saved')).toHaveLength(1);
      // The zone-D alarm's event capture cannot be written either: logged once, monitoring goes on.
      expect(problemWarnings(log, 'capture not written')).toHaveLength(1);
      // The event log under state_dir meets the same full disk: said once too.
      expect(
        log.lines.filter(
          (l) => l.level === 'warn' && /cannot write the event log .*ENOSPC/.test(l.msg),
        ),
      ).toHaveLength(1);
      expect(log.lines.filter((l) => l.level === 'warn')).toHaveLength(4);
      expect(existsSync(join(stateDir, 'watcher', 'state.json'))).toBe(false);
    } finally {
      unmountTmpfs(mnt);
    }
  });

  it('moves a corrupt state.json aside and runs', async () => {
    const stateDir = join(mkdtempSync(join(tmpdir(), 'tw-agent-')), 'state');
    const file = join(stateDir, 'watcher', 'state.json');
    mkdirSync(join(stateDir, 'watcher'), { recursive: true });
    writeFileSync(file, 'garbage, not JSON');
    const log = new MemoryLogger();
    const events: AgentEvent[] = [];
    const sum = await agentOn(stateDir, log, events).run(); // used to stop with exit 2
    expect(sum.windows).toBe(8);
    const qdir = join(stateDir, 'watcher', 'quarantine');
    const moved = readdirSync(qdir);
    expect(moved).toEqual([`state.json.${new Date(t0).toISOString().replace(/[:.]/g, '-')}`]);
    expect(readFileSync(join(qdir, moved[0]!), 'utf8')).toBe('garbage, not JSON');
    expect(log.lines.filter((l) => l.level === 'warn').map((l) => l.msg)).toEqual([
      expect.stringMatching(
        /state\.json is damaged \(not valid JSON.*moved to .*quarantine.* the watcher starts afresh/,
      ),
    ]);
    expect(events[0]).toMatchObject({
      type: 'state_files_quarantined',
      severity: 'warning',
      files: [{ file, moved_to: join(qdir, moved[0]!) }],
    });
    expect(events.some((e) => e.type === 'zone_changed' && e['zone'] === 'D')).toBe(true);
    expect(JSON.parse(readFileSync(file, 'utf8'))).toMatchObject({
      run: Math.floor(t0 / 1000),
      machine_zone: 'D',
    });
    rmSync(stateDir, { recursive: true, force: true });
  });
});

/**
 * A source over arrays that behaves as the serial board does towards the agent: blocks, gap
 * markers, and health() counters kept as it goes (frames sent, gaps, samples lost) plus a few fixed
 * troubles (3 CRC errors, a stall and a reconnect "before" this run). After each block it lets the
 * test pulse the GPIO tach and move the wall clock; it can hold at a given time until released.
 */
class BoardLikeSource implements SampleSource {
  blocksSent = 0;
  private gapsSent = 0;
  private samplesLost = 0;
  private lastGap: readonly [number, number] | null = null;
  private nextPulseS = 0.01;

  constructor(
    private readonly channels: Float32Array[],
    private readonly fs: number,
    private readonly block: number,
    private readonly gaps: ReadonlyArray<readonly [number, number]>,
    private readonly o: {
      onBlockEnd(endS: number, pulses: (rpmAt: (t: number) => number) => number[]): void;
      pauseAtS: number;
      paused(): void;
      hold: Promise<void>;
    },
  ) {}

  async open(): Promise<SourceInfo> {
    return {
      sampleRate: this.fs,
      channelCount: this.channels.length,
      description: 'board-like test source',
    };
  }

  async *items(): AsyncIterable<SourceItem> {
    const n = this.channels[0]!.length;
    let held = false;
    for (let i = 0; i < n;) {
      const gap = this.gaps.find(([a]) => a === i);
      if (gap) {
        this.gapsSent++;
        this.samplesLost += gap[1] - gap[0];
        this.lastGap = gap;
        yield { kind: 'gap', fromIndex: gap[0], toIndex: gap[1], reason: 'test: frames lost' };
        i = gap[1];
        continue;
      }
      const e = Math.min(...this.gaps.map(([a]) => a).filter((a) => a > i), n, i + this.block);
      this.blocksSent++;
      yield {
        kind: 'samples',
        startIndex: i,
        channels: this.channels.map((c) => c.subarray(i, e)),
      };
      i = e;
      const endS = e / this.fs;
      this.o.onBlockEnd(endS, (rpmAt) => {
        const out: number[] = [];
        while (this.nextPulseS < endS) {
          out.push(this.nextPulseS);
          this.nextPulseS += 60 / rpmAt(this.nextPulseS);
        }
        return out;
      });
      if (!held && endS >= this.o.pauseAtS) {
        held = true;
        this.o.paused();
        await this.o.hold;
      }
    }
  }

  async close(): Promise<void> {}

  health(): SerialHealth {
    return {
      device: '/dev/turnwise-daq',
      connected: true,
      bytes_received: this.blocksSent * 1000,
      frames_ok: this.blocksSent,
      crc_errors: 3,
      bad_lengths: 0,
      bad_headers: 0,
      rejected_frames: 0,
      resyncs: 3,
      bytes_skipped: 120,
      gaps: this.gapsSent,
      samples_lost: this.samplesLost,
      sequence_anomalies: 0,
      clock_restarts: 0,
      timing_faults: 0,
      protocol_version: 2,
      sample_delay_ticks: 38.5,
      tach_delay_ticks: 2,
      max_skew_ticks: 0,
      tach_mode_mismatches: 0,
      last_gap_from_index: this.lastGap?.[0] ?? null,
      last_gap_to_index: this.lastGap?.[1] ?? null,
      last_gap_reason: this.lastGap ? 'test: frames lost' : null,
      modem_lines: 'asserted',
      overruns: 0,
      stalls: 1,
      reconnects: 1,
      open_failures: 0,
      last_error: 'CRC mismatch',
      last_error_at: '2026-12-02T05:59:00.000Z',
    };
  }
}

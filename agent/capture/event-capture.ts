import { mkdirSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { stringify } from 'yaml';
import type { SourceItem } from '../../drivers/source.js';
import { WavWriter } from '../../drivers/wav/writer.js';
import { writeFileAtomic } from '../balance/store.js';
import { BurstLog } from '../burst-log.js';
import type { Config } from '../config/schema.js';
import type { Logger } from '../log.js';
import { RawRing } from './raw-ring.js';

/**
 * Event captures: the raw samples of every channel from `pre_s` before an event to `post_s` after
 * it, written as a WAV recording (float32 volts, the board's channel order) under
 * `state_dir/captures/`, with the config that analyses it beside it and a small JSON record:
 *
 *   <id>.wav   the samples             <id>.yaml   config for `turnwise analyze` / `sweep` / `run`
 *   <id>.json  what it is (written last: a capture without it is incomplete and is removed)
 *
 * The pre-event part comes from a RawRing (no allocation per sample). When a capture is complete
 * its samples are copied out once and written off the sampling path; a full disk is logged once
 * per burst and never stops monitoring. Count and bytes are bounded, the oldest removed first.
 */

export interface CaptureRecord {
  readonly id: string;
  /** Why: the event type that triggered it, or "command". */
  readonly reason: string;
  readonly event_id: string | null;
  /** Wall-clock time of the trigger, ISO 8601 UTC. */
  readonly ts: string;
  readonly sample_rate_hz: number;
  readonly channels: number;
  /** Sample-clock indices: first sample, trigger, one past the last. */
  readonly start_index: number;
  readonly trigger_index: number;
  readonly end_index: number;
  /**
   * Seconds actually captured before and after the trigger (shorter before when the agent had just
   * started or after a gap).
   */
  readonly pre_s: number;
  readonly post_s: number;
  readonly wav: string;
  readonly config: string;
  readonly bytes: number;
}

export interface EventCapturerOptions {
  readonly config: Config;
  readonly sampleRate: number;
  readonly channelCount: number;
  /** Largest block the source delivers, samples per channel. */
  readonly maxBlock: number;
  readonly log: Logger;
  /** Wall-clock ms of a sample-clock index. */
  readonly timeOf: (index: number) => number;
  readonly nowMs?: () => number;
}

interface Pending {
  readonly id: string;
  readonly reason: string;
  readonly eventId: string | null;
  readonly trigger: number;
  readonly from: number;
  readonly to: number;
  readonly ts: string;
}

/** Ids are safe file names: trigger time to the second, then a counter. */
const ID_RE = /^[0-9]{8}T[0-9]{6}Z-[0-9]+$/;

export function isCaptureId(id: string): boolean {
  return ID_RE.test(id);
}

/** Complete captures in `dir` (state_dir/captures), oldest first. */
export function listCaptures(dir: string): CaptureRecord[] {
  let names: string[];
  try {
    names = readdirSync(dir);
  } catch {
    return [];
  }
  const out: CaptureRecord[] = [];
  for (const n of names) {
    if (!n.endsWith('.json') || !isCaptureId(n.slice(0, -5))) continue;
    try {
      out.push(JSON.parse(readFileSync(join(dir, n), 'utf8')) as CaptureRecord);
    } catch {
      // unreadable record: left for removeIncomplete at the next start
    }
  }
  return out.sort((a, b) => (a.ts < b.ts ? -1 : a.ts > b.ts ? 1 : a.id.localeCompare(b.id)));
}

export class EventCapturer {
  readonly dir: string;
  private readonly ring: RawRing;
  private readonly pending: Pending[] = [];
  /** Captures are written one after the other (the bounds see each finished one). */
  private queue: Promise<void> = Promise.resolve();
  private readonly burst: BurstLog;
  private readonly pre: number;
  private readonly post: number;
  private seq = 0;
  /** Counters for the heartbeat. */
  written = 0;
  failed = 0;
  removed = 0;

  constructor(private readonly o: EventCapturerOptions) {
    const c = o.config.capture;
    this.dir = join(o.config.state_dir, 'captures');
    this.pre = Math.round(c.pre_s * o.sampleRate);
    this.post = Math.round(c.post_s * o.sampleRate);
    this.ring = new RawRing(o.channelCount, this.pre + this.post + o.maxBlock);
    this.burst = new BurstLog(o.log, { nowMs: o.nowMs, quietMs: 60_000 });
    this.removeIncomplete();
  }

  /** Bytes the ring holds (the memory captures cost while nothing is being written). */
  get ringBytes(): number {
    return this.ring.bytes;
  }

  /** Every source item, in order, before or after the DSP sees it. */
  onItem(item: SourceItem): void {
    if (item.kind !== 'samples') return;
    this.ring.write(item.channels, item.startIndex);
    while (this.pending.length > 0 && this.pending[0]!.to <= this.ring.end)
      this.complete(this.pending.shift()!);
  }

  /** Starts a capture around the newest sample; returns its id, or null when captures are off. */
  trigger(reason: string, eventId: string | null = null): string | null {
    if (!this.o.config.capture.enabled) return null;
    const at = this.ring.end;
    const ms = this.o.timeOf(at);
    const id = `${new Date(ms)
      .toISOString()
      .replace(/[-:]/g, '')
      .replace(/\.\d+Z$/, 'Z')}-${++this.seq}`;
    this.pending.push({
      id,
      reason,
      eventId,
      trigger: at,
      from: at - this.pre,
      to: at + this.post,
      ts: new Date(ms).toISOString(),
    });
    return id;
  }

  /** At stop: writes what the pending captures have so far, and waits for every write. */
  async close(): Promise<void> {
    for (const p of this.pending.splice(0))
      this.complete({ ...p, to: Math.min(p.to, this.ring.end) });
    await this.queue;
    this.burst.flush();
  }

  /** Complete captures on disk, oldest first. */
  list(): CaptureRecord[] {
    return listCaptures(this.dir);
  }

  private complete(p: Pending): void {
    const from = Math.max(p.from, this.ring.start);
    const to = Math.max(from, p.to);
    const n = to - from;
    if (n <= 0) return;
    // One copy per capture (not per sample): the ring moves on while the file is written.
    const samples = Array.from({ length: this.ring.channels }, () => new Float32Array(n));
    this.ring.copy(from, to, samples);
    this.queue = this.queue.then(() => this.write(p, from, to, samples));
  }

  private async write(
    p: Pending,
    from: number,
    to: number,
    samples: Float32Array[],
  ): Promise<void> {
    const fs = this.o.sampleRate;
    const cfg = this.o.config;
    const wavName = `${p.id}.wav`;
    const yamlName = `${p.id}.yaml`;
    const bytes = 4 * samples.length * (to - from);
    try {
      mkdirSync(this.dir, { recursive: true });
      this.makeRoom(bytes);
      const map = Array.from({ length: this.o.channelCount }, (_, ch) => {
        const s = cfg.sensors.find((x) => x.channel === ch);
        return s
          ? `ch${ch} ${s.id} (${s.bearing} ${s.direction}, ${s.sensitivity_mv_per_g} mV/g)`
          : ch === cfg.tach.channel
            ? `ch${ch} tach`
            : `ch${ch} unused`;
      });
      const wav = await WavWriter.create(join(this.dir, wavName), {
        sampleRate: fs,
        channelCount: this.o.channelCount,
        comment: `turnwise capture ${p.id} (${p.reason}) of ${cfg.machine.id}; ${map.join('; ')}`,
      });
      let size: number;
      try {
        const chunk = 8192;
        for (let i = 0; i < samples[0]!.length; i += chunk) {
          const m = Math.min(chunk, samples[0]!.length - i);
          await wav.write(
            samples.map((s) => s.subarray(i, i + m)),
            m,
          );
        }
        size = await wav.close();
      } catch (e) {
        await wav.abandon();
        throw e;
      }
      await writeFileAtomic(join(this.dir, yamlName), captureConfigYaml(cfg, wavName, p));
      const rec: CaptureRecord = {
        id: p.id,
        reason: p.reason,
        event_id: p.eventId,
        ts: p.ts,
        sample_rate_hz: fs,
        channels: this.o.channelCount,
        start_index: from,
        trigger_index: p.trigger,
        end_index: to,
        pre_s: (p.trigger - from) / fs,
        post_s: (to - p.trigger) / fs,
        wav: wavName,
        config: yamlName,
        bytes: size,
      };
      await writeFileAtomic(join(this.dir, `${p.id}.json`), JSON.stringify(rec, null, 2) + '\n');
      this.written++;
      this.burst.resolved('capture not written', 'captures are written again');
    } catch (e) {
      this.failed++;
      for (const f of [wavName, yamlName, `${p.id}.json`])
        rmSync(join(this.dir, f), { force: true });
      const code = (e as NodeJS.ErrnoException).code ?? (e as Error).message;
      this.burst.report(
        'capture not written',
        `capture ${p.id} could not be written to ${this.dir} (${code}); monitoring goes on`,
        { capture_id: p.id, error_code: code },
        code,
      );
    }
  }

  /** Removes the oldest captures until one more of `bytes` fits the count and size bounds. */
  private makeRoom(bytes: number): void {
    const c = this.o.config.capture;
    const maxBytes = c.max_mb * 2 ** 20;
    const all = this.list();
    let total = all.reduce((s, r) => s + r.bytes, 0);
    while (all.length > 0 && (all.length >= c.max_count || total + bytes > maxBytes)) {
      const old = all.shift()!;
      for (const f of [`${old.id}.json`, old.wav, old.config])
        rmSync(join(this.dir, f), { force: true });
      total -= old.bytes;
      this.removed++;
    }
  }

  /** A capture whose JSON record is missing was cut short (a crash, a full disk): its files go. */
  private removeIncomplete(): void {
    let names: string[];
    try {
      names = readdirSync(this.dir);
    } catch {
      return;
    }
    const complete = new Set(names.filter((n) => n.endsWith('.json')).map((n) => n.slice(0, -5)));
    for (const n of names) {
      const id = n.replace(/\.(wav|yaml|json)(\.tmp.*)?$/, '');
      if (!isCaptureId(id)) continue;
      if (!complete.has(id) || /\.tmp/.test(n)) {
        try {
          if (statSync(join(this.dir, n)).isFile()) rmSync(join(this.dir, n), { force: true });
        } catch {
          // already gone
        }
      }
    }
  }
}

/**
 * The config that analyses a capture: the measuring sections of the agent's own, reading the WAV
 * beside it.
 */
export function captureConfigYaml(
  cfg: Config,
  wavName: string,
  p: { id: string; reason: string; ts: string },
): string {
  const keep = {
    machine: cfg.machine,
    units: cfg.units,
    tach: cfg.tach,
    sensors: cfg.sensors,
    dsp: cfg.dsp,
    acquisition: { driver: 'wav', file: wavName },
    state_dir: cfg.state_dir,
    balance: cfg.balance,
    watcher: cfg.watcher,
    sweep: cfg.sweep,
  };
  return (
    `# turnwise capture ${p.id}: ${p.reason} at ${p.ts}. Analyse ` +
    `with\n#   turnwise analyze ${wavName} --config ${p.id}.yaml\n` +
    stringify(keep)
  );
}

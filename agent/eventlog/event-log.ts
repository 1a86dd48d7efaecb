import {
  closeSync,
  fsyncSync,
  mkdirSync,
  openSync,
  readFileSync,
  renameSync,
  statSync,
  writeSync,
} from 'node:fs';
import { join } from 'node:path';
import type { AgentEvent } from '../events.js';
import type { Logger } from '../log.js';

/**
 * The agent's own event log under `<state_dir>/events/`: one JSON line per event (the event as
 * queued, turnwise.event.v1 fields), appended and fsynced, so an alarm's history survives a reboot
 * on a board whose journal is kept in RAM (the Raspberry Pi OS default). Bounded: the current file
 * `events.jsonl` is moved to `events.1.jsonl` (replacing the older one) when it would pass half of
 * `maxBytes`, so the two never hold more than `maxBytes`. A torn last line (power lost mid-write)
 * is skipped by the reader. Writes happen on a timer, never on the sampling path; a disk that
 * refuses is said once per run and the agent goes on.
 */

export const EVENT_LOG_DIR = 'events';
const CURRENT = 'events.jsonl';
const PREVIOUS = 'events.1.jsonl';

export interface EventLogOptions {
  readonly stateDir: string;
  readonly maxBytes: number;
  readonly log: Logger;
  /**
   * Lines are written this long after the first one queued, ms (default 200): a burst is one write
   * and one fsync.
   */
  readonly flushMs?: number;
}

export class EventLog {
  readonly dir: string;
  private readonly half: number;
  private readonly log: Logger;
  private readonly flushMs: number;
  private size: number | null = null;
  private queue: string[] = [];
  private timer: NodeJS.Timeout | null = null;
  private failing = false;
  private closed = false;
  private readonly counts = { written: 0, failed: 0, rotations: 0 };

  constructor(o: EventLogOptions) {
    this.dir = join(o.stateDir, EVENT_LOG_DIR);
    this.half = Math.max(4096, Math.floor(o.maxBytes / 2));
    this.log = o.log;
    this.flushMs = o.flushMs ?? 200;
  }

  /** Queues one event; returns at once. */
  append(e: AgentEvent): void {
    if (this.closed) return;
    this.queue.push(JSON.stringify(e) + '\n');
    if (!this.timer) {
      this.timer = setTimeout(() => this.flush(), this.flushMs);
      this.timer.unref();
    }
  }

  health(): Record<string, number | boolean> {
    return {
      event_log_written_total: this.counts.written,
      event_log_failed_total: this.counts.failed,
      event_log_ok: !this.failing,
    };
  }

  /** Writes what is queued now (called by the timer and by close()). */
  flush(): void {
    if (this.timer) clearTimeout(this.timer);
    this.timer = null;
    const lines = this.queue.splice(0);
    if (lines.length === 0) return;
    try {
      mkdirSync(this.dir, { recursive: true });
      const file = join(this.dir, CURRENT);
      if (this.size === null) this.size = fileSize(file);
      const text = lines.join('');
      const bytes = Buffer.byteLength(text);
      if (this.size > 0 && this.size + bytes > this.half) {
        renameSync(file, join(this.dir, PREVIOUS));
        this.size = 0;
        this.counts.rotations++;
      }
      const fd = openSync(file, 'a', 0o640);
      try {
        writeSync(fd, text);
        fsyncSync(fd);
      } finally {
        closeSync(fd);
      }
      this.size += bytes;
      this.counts.written += lines.length;
      if (this.failing) this.log.info({ dir: this.dir }, `event log writes again to ${this.dir}`);
      this.failing = false;
    } catch (err) {
      this.counts.failed += lines.length;
      this.size = null;
      if (!this.failing) {
        const code = (err as NodeJS.ErrnoException).code ?? String(err);
        this.log.warn(
          { dir: this.dir, error_code: code },
          `cannot write the event log in ${this.dir} (${code}); events ` +
            `still go to MQTT and the log, but \`turnwise events\` will miss ` +
            `them until this is fixed: check state_dir (space, permissions)`,
        );
      }
      this.failing = true;
    }
  }

  close(): void {
    this.flush();
    this.closed = true;
  }
}

function fileSize(file: string): number {
  try {
    return statSync(file).size;
  } catch {
    return 0;
  }
}

export interface ReadResult {
  readonly events: AgentEvent[];
  /** Lines that were not a whole JSON event (a torn last line after a power cut, damage). */
  readonly skipped: number;
  readonly files: string[];
}

/**
 * Every event in the log, oldest first, with the filters applied. A missing log is an empty one.
 */
export function readEventLog(
  stateDir: string,
  f: {
    sinceMs?: number;
    untilMs?: number;
    types?: readonly string[];
    minSeverity?: 'info' | 'warning' | 'alarm';
  } = {},
): ReadResult {
  const dir = join(stateDir, EVENT_LOG_DIR);
  const rank = { info: 0, warning: 1, alarm: 2 } as const;
  const events: AgentEvent[] = [];
  const files: string[] = [];
  let skipped = 0;
  for (const name of [PREVIOUS, CURRENT]) {
    let text: string;
    try {
      text = readFileSync(join(dir, name), 'utf8');
    } catch {
      continue;
    }
    files.push(join(dir, name));
    for (const line of text.split('\n')) {
      if (!line.trim()) continue;
      let e: AgentEvent;
      try {
        e = JSON.parse(line) as AgentEvent;
      } catch {
        skipped++;
        continue;
      }
      const t = Date.parse(e?.ts);
      if (!e || typeof e.type !== 'string' || !Number.isFinite(t) || !(e.severity in rank)) {
        skipped++;
        continue;
      }
      if (f.sinceMs !== undefined && t < f.sinceMs) continue;
      if (f.untilMs !== undefined && t > f.untilMs) continue;
      if (f.types && f.types.length > 0 && !f.types.includes(e.type)) continue;
      if (f.minSeverity && rank[e.severity] < rank[f.minSeverity]) continue;
      events.push(e);
    }
  }
  events.sort((a, b) => Date.parse(a.ts) - Date.parse(b.ts));
  return { events, skipped, files };
}

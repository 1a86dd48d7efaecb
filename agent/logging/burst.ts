import type { Logger } from '../log.js';
import type { Timers } from '../timers.js';

/**
 * Once per burst: a problem that repeats (a device that keeps refusing, a broker that keeps
 * dropping, a channel that keeps clipping) is logged in full the first time, then only counted.
 * While it goes on, one summary line every `summaryEveryMs` says how often it happened; when it has
 * not happened for `quietMs` (or the caller says it is over with `resolve`), one line closes it with
 * the total. The journal keeps the story without thousands of identical lines, and journald's rate
 * limit never has to throw away the line that matters.
 *
 * Repeats cost a map lookup and two assignments: no allocation, no timer work.
 */

export interface BurstOptions {
  /** A problem that has not recurred for this long is over and its summary is written. Default 2 min. */
  quietMs?: number;
  /** While a problem keeps recurring, a summary is written this often. Default 10 min. */
  summaryEveryMs?: number;
  /** Most problems tracked at once; beyond it the one opened first is closed. Default 64. */
  maxOpen?: number;
}

type Level = 'warn' | 'error';

interface Burst {
  readonly level: Level;
  readonly msg: string;
  readonly firstAt: number;
  lastAt: number;
  /** Occurrences since the burst began, the first included. */
  total: number;
  /** Occurrences since the last line written for this burst. */
  sinceLine: number;
  /** When the last line for this burst was written. */
  lineAt: number;
  cancelTimer: () => void;
}

const iso = (ms: number) => new Date(ms).toISOString();
const seconds = (ms: number) => Math.round(ms / 100) / 10;

export class BurstLog {
  private readonly quietMs: number;
  private readonly summaryEveryMs: number;
  private readonly maxOpen: number;
  private readonly open = new Map<string, Burst>();

  constructor(
    private readonly logger: Logger,
    private readonly timers: Timers,
    opts: BurstOptions = {},
  ) {
    this.quietMs = opts.quietMs ?? 120_000;
    this.summaryEveryMs = opts.summaryEveryMs ?? 600_000;
    this.maxOpen = opts.maxOpen ?? 64;
    if (!(this.quietMs > 0) || !(this.summaryEveryMs > 0) || !(this.maxOpen >= 1)) {
      throw new RangeError(`BurstLog: quietMs, summaryEveryMs and maxOpen must be positive (got ${this.quietMs}, ${this.summaryEveryMs}, ${this.maxOpen})`);
    }
  }

  /** One occurrence of problem `key` at warning level. `fields` and `msg` are used only for its first line. */
  warn(key: string, fields: Record<string, unknown>, msg: string): void {
    this.report('warn', key, fields, msg);
  }

  /** One occurrence of problem `key` at error level. */
  error(key: string, fields: Record<string, unknown>, msg: string): void {
    this.report('error', key, fields, msg);
  }

  /**
   * Problem `key` is over (the device answered, the broker accepted). Writes the closing line if
   * the problem was open; does nothing otherwise, so it may be called on every success.
   */
  resolve(key: string): void {
    const b = this.open.get(key);
    if (b) this.close(key, b, 'resolved');
  }

  /** Closes every open problem with its summary line (at shutdown). */
  flush(): void {
    for (const [key, b] of this.open) this.close(key, b, 'shutdown');
  }

  /** How many problems are open now. */
  get openCount(): number {
    return this.open.size;
  }

  private report(level: Level, key: string, fields: Record<string, unknown>, msg: string): void {
    const now = this.timers.nowMs();
    const b = this.open.get(key);
    if (b) {
      b.total++;
      b.sinceLine++;
      b.lastAt = now;
      return;
    }
    if (this.open.size >= this.maxOpen) {
      const [oldKey, oldBurst] = this.open.entries().next().value as [string, Burst];
      this.close(oldKey, oldBurst, 'evicted');
    }
    this.logger[level]({ ...fields, burst: key }, msg);
    const nb: Burst = { level, msg, firstAt: now, lastAt: now, total: 1, sinceLine: 0, lineAt: now, cancelTimer: () => {} };
    this.open.set(key, nb);
    this.schedule(key, nb, now);
  }

  private schedule(key: string, b: Burst, now: number): void {
    const due = Math.min(b.lastAt + this.quietMs, b.lineAt + this.summaryEveryMs);
    b.cancelTimer = this.timers.after(Math.max(0, due - now), () => this.check(key, b));
  }

  private check(key: string, b: Burst): void {
    if (this.open.get(key) !== b) return; // closed meanwhile
    const now = this.timers.nowMs();
    if (now - b.lastAt >= this.quietMs) {
      this.close(key, b, 'quiet');
      return;
    }
    if (now - b.lineAt >= this.summaryEveryMs && b.sinceLine > 0) {
      this.logger[b.level](
        { burst: key, count: b.sinceLine, window_s: seconds(now - b.lineAt), count_total: b.total, first_at: iso(b.firstAt) },
        `${b.msg} (still happening: ${b.sinceLine} more in the last ${seconds(now - b.lineAt)} s, ${b.total} since ${iso(b.firstAt)})`,
      );
      b.sinceLine = 0;
      b.lineAt = now;
    }
    this.schedule(key, b, now);
  }

  private close(key: string, b: Burst, why: 'quiet' | 'resolved' | 'shutdown' | 'evicted'): void {
    b.cancelTimer();
    this.open.delete(key);
    // A lone occurrence that simply did not come back needs no second line.
    if (why === 'quiet' && b.total === 1) return;
    const over = why === 'quiet' ? `not seen for ${seconds(this.quietMs)} s` : why === 'resolved' ? 'resolved' : why === 'shutdown' ? 'still open at shutdown' : 'no longer tracked (too many open problems)';
    this.logger.info(
      { burst: key, count_total: b.total, count: b.sinceLine, duration_s: seconds(b.lastAt - b.firstAt), first_at: iso(b.firstAt), last_at: iso(b.lastAt), ended: why },
      `${b.msg}: ${over}; ${b.total} occurrence(s) from ${iso(b.firstAt)} to ${iso(b.lastAt)}`,
    );
  }
}

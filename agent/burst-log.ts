import type { Logger } from './log.js';

interface Burst {
  readonly firstMs: number;
  lastMs: number;
  lastSummaryMs: number;
  count: number;
  /** Occurrences since the last line written for this burst. */
  unlogged: number;
  lastDetail: string;
  readonly kind: string | undefined;
}

export interface BurstLogOptions {
  /**
   * A burst ends after this long without a new occurrence: `flush()` then writes its summary, and
   * an occurrence after such a pause starts a new burst. `Infinity`: only `resolved()` ends one.
   */
  readonly quietMs?: number;
  /** While a burst goes on, `flush()` writes a progress line at most this often. */
  readonly summaryEveryMs?: number;
  readonly nowMs?: () => number;
}

/**
 * Logs a recurring problem once per burst instead of once per occurrence: the first occurrence is
 * written at once (warn), the rest are counted. A burst ends when the caller says the problem is
 * `resolved()` (an info line with the count), or by itself after `quietMs` without an occurrence;
 * `flush()` (call it every second or so where bursts may last long) writes a progress line while
 * a burst goes on and a summary when it has gone quiet. A different `kind` of problem under the
 * same key starts a new burst, with a line of its own.
 */
export class BurstLog {
  private readonly bursts = new Map<string, Burst>();
  private readonly quietMs: number;
  private readonly summaryEveryMs: number;
  private readonly nowMs: () => number;

  constructor(
    private readonly log: Logger,
    opts: BurstLogOptions = {},
  ) {
    this.quietMs = opts.quietMs ?? 10_000;
    this.summaryEveryMs = opts.summaryEveryMs ?? 60_000;
    this.nowMs = opts.nowMs ?? Date.now;
  }

  /**
   * One occurrence of problem `key`; `detail` says what happened this time. `kind` tells apart
   * problems under one key (a refused password and a refused connection, say). Returns true when
   * this occurrence was written, false when it was only counted.
   */
  report(
    key: string,
    detail: string,
    fields: Record<string, unknown> = {},
    kind?: string,
  ): boolean {
    const now = this.nowMs();
    const b = this.bursts.get(key);
    if (b && b.kind === kind && now - b.lastMs < this.quietMs) {
      b.lastMs = now;
      b.count++;
      b.unlogged++;
      b.lastDetail = detail;
      return false;
    }
    if (b) this.end(key, b);
    this.bursts.set(key, {
      firstMs: now,
      lastMs: now,
      lastSummaryMs: now,
      count: 1,
      unlogged: 0,
      lastDetail: detail,
      kind,
    });
    this.log.warn(
      { ...fields, problem: key },
      `${detail} (further "${key}" problems are counted and summarised)`,
    );
    return true;
  }

  /**
   * The problem under `key` is over: logs `message` with the count and duration. False when no
   * burst was open.
   */
  resolved(key: string, message: string, fields: Record<string, unknown> = {}): boolean {
    const b = this.bursts.get(key);
    if (!b) return false;
    this.bursts.delete(key);
    this.log.info(
      { ...fields, problem: key, occurrences: b.count, lasted_s: this.lastedS(b, this.nowMs()) },
      message,
    );
    return true;
  }

  isOpen(key: string): boolean {
    return this.bursts.has(key);
  }

  /**
   * Writes progress and end-of-burst summaries that are due; `endAll` ends every burst now
   * (shutdown).
   */
  flush(endAll = false): void {
    const now = this.nowMs();
    for (const [key, b] of this.bursts) {
      if (endAll || now - b.lastMs >= this.quietMs) this.end(key, b);
      else if (b.unlogged > 0 && now - b.lastSummaryMs >= this.summaryEveryMs) {
        this.log.warn(
          { problem: key, occurrences: b.count, since_last_line: b.unlogged },
          `"${key}" still happening: ${b.unlogged} more in the ` +
            `last ${((now - b.lastSummaryMs) / 1000).toFixed(0)} s ` +
            `(${b.count} in this burst); last: ${b.lastDetail}`,
        );
        b.unlogged = 0;
        b.lastSummaryMs = now;
      }
    }
  }

  /**
   * Ends a burst that went quiet or gave way to another kind; a single occurrence needs no summary.
   */
  private end(key: string, b: Burst): void {
    this.bursts.delete(key);
    if (b.count < 2) return;
    const lasted = this.lastedS(b, b.lastMs);
    this.log.info(
      { problem: key, occurrences: b.count, lasted_s: lasted },
      `"${key}" burst over: ${b.count} occurrence(s) ` +
        `in ${lasted.toFixed(1)} s; last: ${b.lastDetail}`,
    );
  }

  private lastedS(b: Burst, untilMs: number): number {
    return Math.round((untilMs - b.firstMs) / 100) / 10;
  }
}

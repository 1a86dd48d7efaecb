import type { Logger } from './log.js';

interface Burst {
  readonly firstMs: number;
  lastMs: number;
  lastSummaryMs: number;
  count: number;
  /** Occurrences since the last line written for this burst. */
  unlogged: number;
  lastDetail: string;
}

export interface BurstLogOptions {
  /** A burst ends after this long without a new occurrence; its summary is then written. */
  readonly quietMs?: number;
  /** While a burst goes on, a progress line at most this often. */
  readonly summaryEveryMs?: number;
  readonly nowMs?: () => number;
}

/**
 * Logs a recurring problem once per burst instead of once per occurrence: the first occurrence is
 * written at once, the rest are counted; `flush()` (call it every second or so) writes a progress
 * line while the burst goes on and a summary when it has been quiet for `quietMs`.
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

  /** One occurrence of problem `key`; `detail` says what happened this time. */
  report(key: string, detail: string, fields: Record<string, unknown> = {}): void {
    const now = this.nowMs();
    const b = this.bursts.get(key);
    if (!b) {
      this.bursts.set(key, { firstMs: now, lastMs: now, lastSummaryMs: now, count: 1, unlogged: 0, lastDetail: detail });
      this.log.warn({ ...fields, problem: key }, `${detail} (further "${key}" problems are counted and summarised)`);
      return;
    }
    b.lastMs = now;
    b.count++;
    b.unlogged++;
    b.lastDetail = detail;
  }

  /** Writes progress and end-of-burst summaries that are due; `endAll` ends every burst now (shutdown). */
  flush(endAll = false): void {
    const now = this.nowMs();
    for (const [key, b] of this.bursts) {
      if (endAll || now - b.lastMs >= this.quietMs) {
        this.bursts.delete(key);
        if (b.count > 1) {
          this.log.info(
            { problem: key, occurrences: b.count, duration_s: (b.lastMs - b.firstMs) / 1000 },
            `"${key}" burst over: ${b.count} occurrence(s) in ${((b.lastMs - b.firstMs) / 1000).toFixed(1)} s; last: ${b.lastDetail}`,
          );
        }
      } else if (b.unlogged > 0 && now - b.lastSummaryMs >= this.summaryEveryMs) {
        this.log.warn(
          { problem: key, occurrences: b.count, since_last_line: b.unlogged },
          `"${key}" still happening: ${b.unlogged} more in the last ${((now - b.lastSummaryMs) / 1000).toFixed(0)} s (${b.count} in this burst); last: ${b.lastDetail}`,
        );
        b.unlogged = 0;
        b.lastSummaryMs = now;
      }
    }
  }
}

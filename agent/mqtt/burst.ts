import type { Logger } from '../log.js';

/**
 * Says a recurring problem once per burst instead of once per occurrence: the first occurrence is
 * logged (warn), repeats are only counted, a different kind of problem under the same key is
 * logged again, and `resolved()` logs the end of the burst with how many times it happened.
 * With `quietMs` set, a burst also ends by itself after that long without an occurrence.
 */
export class BurstReporter {
  private readonly open = new Map<string, { since: number; last: number; count: number; kind: string }>();

  constructor(
    private readonly log: Logger,
    private readonly now: () => number = Date.now,
    private readonly quietMs = 0,
  ) {}

  /** Records one occurrence. `kind` distinguishes problems under one key (default: the message). Returns true when it was logged. */
  occurred(key: string, message: string, fields: Record<string, unknown> = {}, kind = message): boolean {
    const t = this.now();
    const b = this.open.get(key);
    if (b && b.kind === kind && (this.quietMs === 0 || t - b.last < this.quietMs)) {
      b.count++;
      b.last = t;
      return false;
    }
    this.open.set(key, { since: t, last: t, count: 1, kind });
    this.log.warn({ ...fields, problem: key }, message);
    return true;
  }

  /** Ends the burst under `key`, if any, logging `message` with the count and duration. */
  resolved(key: string, message: string, fields: Record<string, unknown> = {}): boolean {
    const b = this.open.get(key);
    if (!b) return false;
    this.open.delete(key);
    this.log.info({ ...fields, problem: key, occurrences: b.count, lasted_s: Math.round((this.now() - b.since) / 100) / 10 }, message);
    return true;
  }

  isOpen(key: string): boolean {
    return this.open.has(key);
  }
}

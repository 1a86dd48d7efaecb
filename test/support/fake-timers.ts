import type { Timers } from '../../agent/timers.js';

/** Timers driven by the test: time moves only in advance(), which fires due callbacks in order. */
export class FakeTimers implements Timers {
  private t: number;
  private seq = 0;
  private readonly pending = new Map<number, { at: number; fn: () => void }>();

  constructor(startMs = Date.UTC(2026, 0, 5, 6, 0, 0)) {
    this.t = startMs;
  }

  now(): number {
    return this.t;
  }

  after(ms: number, fn: () => void): () => void {
    const id = ++this.seq;
    this.pending.set(id, { at: this.t + Math.max(0, ms), fn });
    return () => this.pending.delete(id);
  }

  /** Moves time forward by `ms`, running each timer at its own due time (earliest first). */
  advance(ms: number): void {
    const end = this.t + ms;
    for (;;) {
      let nextId = -1;
      let nextAt = Infinity;
      for (const [id, t] of this.pending) {
        if (t.at <= end && (t.at < nextAt || (t.at === nextAt && id < nextId))) {
          nextAt = t.at;
          nextId = id;
        }
      }
      if (nextId < 0) break;
      const t = this.pending.get(nextId)!;
      this.pending.delete(nextId);
      this.t = t.at;
      t.fn();
    }
    this.t = end;
  }

  get pendingCount(): number {
    return this.pending.size;
  }
}

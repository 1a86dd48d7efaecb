/**
 * On-delay for a reported state: a new value must hold over consecutive windows spanning at least
 * `delayS` seconds of measured data (from the start of the first window that showed it to the end
 * of the latest) before it replaces the confirmed value. Time is the window's own sample clock, so
 * the delay means the same on a live board and when a recording is replayed.
 */
export class OnDelay<T> {
  private confirmed: T | undefined;
  private pending: T | undefined;
  private pendingSinceS = 0;
  private lastEndS = -Infinity;

  /** @param delayS seconds a new value must hold; a function gives each value its own delay */
  constructor(
    private readonly delayS: number | ((to: T) => number),
    initial?: T,
  ) {
    this.confirmed = initial;
  }

  get value(): T | undefined {
    return this.confirmed;
  }

  /**
   * Feeds the value seen over a window [startS, endS). Returns the change when the value is
   * confirmed, otherwise null.
   */
  update(seen: T, startS: number, endS: number): { from: T | undefined; to: T } | null {
    // sample clock restarted: start timing afresh
    if (startS < this.lastEndS) this.pending = undefined;
    this.lastEndS = endS;
    if (seen === this.confirmed) {
      this.pending = undefined;
      return null;
    }
    if (seen !== this.pending) {
      this.pending = seen;
      this.pendingSinceS = startS;
    }
    if (
      endS - this.pendingSinceS <
      (typeof this.delayS === 'function' ? this.delayS(seen) : this.delayS)
    )
      return null;
    const from = this.confirmed;
    this.confirmed = seen;
    this.pending = undefined;
    return { from, to: seen };
  }

  /** Forgets the confirmed value (e.g. after a new baseline). */
  reset(value?: T): void {
    this.confirmed = value;
    this.pending = undefined;
  }
}

/**
 * Time and one-shot timers, injected so that code which waits or counts time can be tested with a
 * fake clock (test/support/fake-timers.ts) instead of real sleeps.
 */
export interface Timers {
  /** Wall-clock milliseconds since the Unix epoch (Date.now() in production). */
  nowMs(): number;
  /** Calls `fn` once, `ms` milliseconds from now. Returns a function that cancels it. */
  after(ms: number, fn: () => void): () => void;
}

/**
 * Real timers. They are unref'd: a pending summary or watchdog tick never keeps the process alive
 * on its own, so a shutdown is never held up by them.
 */
export const systemTimers: Timers = {
  nowMs: () => Date.now(),
  after(ms, fn) {
    const t = setTimeout(fn, ms);
    t.unref();
    return () => clearTimeout(t);
  },
};

import type { Clock } from './clock.js';

/**
 * A clock that can also wake code up later: for parts that wait (the watchdog keeper, the
 * sd_notify relay's restart), tested with test/support/fake-timers.ts instead of real sleeps.
 */
export interface Timers extends Clock {
  /** Calls `fn` once, `ms` milliseconds from now. Returns a function that cancels it. */
  after(ms: number, fn: () => void): () => void;
}

/**
 * Real timers. They are unref'd: a pending summary or watchdog tick never keeps the process alive
 * on its own, so a shutdown is never held up by them.
 */
export const systemTimers: Timers = {
  now: () => Date.now(),
  after(ms, fn) {
    const t = setTimeout(fn, ms);
    t.unref();
    return () => clearTimeout(t);
  },
};

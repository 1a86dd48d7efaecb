/**
 * Wall-clock pacing for sources that can make samples faster than a board would (recordings, the
 * simulator): a block is handed out when a board sampling at the source's rate would have finished
 * it.
 */

/** Wall clock for pacing; injected so tests can run without waiting. */
export interface Pacer {
  /** Milliseconds, monotonic. */
  now(): number;
  sleep(ms: number): Promise<void>;
}

export const systemPacer: Pacer = {
  now: () => performance.now(),
  sleep: (ms) => new Promise((resolve) => setTimeout(resolve, ms)),
};

/**
 * Waits until `samples` samples after `t0Ms` (a `pacer.now()` reading) are due at `sampleRate` per
 * second.
 */
export async function waitForSamples(
  pacer: Pacer,
  t0Ms: number,
  samples: number,
  sampleRate: number,
): Promise<void> {
  const wait = t0Ms + (samples / sampleRate) * 1000 - pacer.now();
  if (wait > 0) await pacer.sleep(wait);
}

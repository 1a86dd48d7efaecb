/** Wall-clock time, injected so that logic never reads the system clock itself. */
export interface Clock {
  /** Milliseconds since 1970-01-01T00:00:00Z. */
  now(): number;
}

export const systemClock: Clock = { now: () => Date.now() };

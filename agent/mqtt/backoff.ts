/**
 * Delay before reconnect attempt number `failures` (0 = the first attempt after a loss):
 * exponential growth from `minMs`, capped at `maxMs`, with jitter spread over most of the range
 * (between half of `minMs` and the cap). A broker restarted under hundreds of boards then sees
 * their reconnects spread over seconds instead of all in the same second; a plain +/-20 %
 * around one fixed value would not do that. Pure; `random` returns [0, 1).
 */
export function reconnectDelayMs(failures: number, minMs: number, maxMs: number, random: () => number): number {
  const cap = Math.min(maxMs, minMs * 2 ** Math.min(Math.max(failures, 0), 30));
  const floor = Math.min(minMs / 2, cap);
  return floor + random() * (cap - floor);
}

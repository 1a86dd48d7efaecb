/**
 * Delay before reconnect attempt number `failures` (0 = the first attempt after a loss):
 * exponential growth from `minMs`, capped at `maxMs`, and a wait drawn at random between half
 * that cap and the cap ("equal jitter"). The wait still grows with every failure, and boards
 * that lost a restarted broker at the same moment come back spread over half of their current
 * cap (several seconds once a restart has lasted a few attempts) instead of all in the same
 * second, as a plain +/-20 % around one value would. Pure; `random` returns [0, 1).
 */
export function reconnectDelayMs(
  failures: number,
  minMs: number,
  maxMs: number,
  random: () => number,
): number {
  const cap = Math.min(maxMs, minMs * 2 ** Math.min(Math.max(failures, 0), 30));
  return cap / 2 + random() * (cap / 2);
}

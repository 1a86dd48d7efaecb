import type { Logger } from '../log.js';
import type { Timers } from '../timers.js';
import type { ServiceNotifier } from './notifier.js';

/**
 * Says whether the agent is doing its job: null when it is, otherwise why not, e.g.
 * "no sample block for 20 s". Check the agent's own liveness (the pipeline moves, the event loop
 * turns), not the world outside it: a restart cures a stuck agent, not an unplugged cable.
 */
export type HealthCheck = () => string | null;

/**
 * Sends WATCHDOG=1 every `notifier.watchdogPingMs` (half of WatchdogSec) while the health check
 * passes, and withholds it while it fails, so systemd restarts an agent that is alive but stuck.
 * A blocked event loop withholds the pings by itself: the timer cannot fire. Does nothing when the
 * service has no watchdog.
 */
export class WatchdogKeeper {
  private cancel: (() => void) | null = null;
  private withheld: string | null = null;

  constructor(
    private readonly notifier: ServiceNotifier,
    private readonly timers: Timers,
    private readonly logger: Logger,
    private readonly healthCheck: HealthCheck = () => null,
  ) {}

  /** True while pings are being sent on schedule. */
  get running(): boolean {
    return this.cancel !== null;
  }

  start(): void {
    const every = this.notifier.watchdogPingMs;
    if (every === null || this.cancel) return;
    const tick = () => {
      this.beat();
      this.cancel = this.timers.after(every, tick);
    };
    tick();
  }

  stop(): void {
    this.cancel?.();
    this.cancel = null;
  }

  private beat(): void {
    let reason: string | null;
    try {
      reason = this.healthCheck();
    } catch (e) {
      reason = `health check failed: ${(e as Error)?.message ?? String(e)}`;
    }
    if (reason === null) {
      if (this.withheld !== null)
        this.logger.info({ was: this.withheld }, 'agent healthy again: watchdog pings resumed');
      this.withheld = null;
      this.notifier.watchdog();
      return;
    }
    if (this.withheld === null) {
      this.logger.error(
        { reason },
        `withholding the systemd watchdog ping: ${reason}. systemd ` +
          `restarts the service if this lasts WatchdogSec`,
      );
    }
    this.withheld = reason;
  }
}

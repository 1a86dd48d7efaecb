/**
 * What the agent tells the service manager (systemd's sd_notify protocol, see sd_notify(3)):
 * started, still alive, what it is doing, shutting down. The production implementation is
 * SystemdNotifier (systemd-notifier.ts); off systemd (a laptop, a test) every call does nothing.
 */
export interface ServiceNotifier {
  /** True when a service manager listens (NOTIFY_SOCKET was set). */
  readonly active: boolean;
  /**
   * How often to send watchdog(): half of the timeout systemd set (WATCHDOG_USEC), in ms, as
   * sd_watchdog_enabled(3) advises. null when the service has no watchdog.
   */
  readonly watchdogPingMs: number | null;
  /** READY=1: start-up is complete (Type=notify units count as started only now). */
  ready(status?: string): void;
  /** STATUS=...: one line shown by `systemctl status turnwise`. */
  status(text: string): void;
  /** WATCHDOG=1: still alive. Send only when the agent really is working (see WatchdogKeeper). */
  watchdog(): void;
  /** STOPPING=1: shutting down on purpose. */
  stopping(status?: string): void;
  /** Delivers anything still queued, then releases the notifier. Safe to call twice. */
  close(): Promise<void>;
}

/** The notifier off systemd: does nothing. */
export class NoopNotifier implements ServiceNotifier {
  readonly active = false;
  readonly watchdogPingMs = null;
  ready(): void {}
  status(): void {}
  watchdog(): void {}
  stopping(): void {}
  async close(): Promise<void> {}
}

/** Records every message as the datagram text systemd would receive, for tests. */
export class MemoryNotifier implements ServiceNotifier {
  readonly active = true;
  readonly messages: string[] = [];
  closed = false;
  constructor(readonly watchdogPingMs: number | null = null) {}
  ready(status?: string): void {
    this.messages.push(notifyMessage('READY=1', status));
  }
  status(text: string): void {
    this.messages.push(notifyMessage(null, text));
  }
  watchdog(): void {
    this.messages.push('WATCHDOG=1');
  }
  stopping(status?: string): void {
    this.messages.push(notifyMessage('STOPPING=1', status));
  }
  async close(): Promise<void> {
    this.closed = true;
  }
}

/**
 * One sd_notify datagram: an optional state assignment and an optional STATUS line, newline
 * separated. STATUS is one line of at most 200 characters (newlines and control characters
 * become spaces) so it reads well in `systemctl status`.
 */
export function notifyMessage(state: string | null, status?: string): string {
  const parts: string[] = [];
  if (state) parts.push(state);
  if (status !== undefined)
    parts.push(`STATUS=${status.replace(/[\u0000-\u001f\u007f]+/g, ' ').slice(0, 200)}`);
  return parts.join('\n');
}

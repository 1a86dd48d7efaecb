/**
 * The envelope every event shares (watcher, advisory, agent). Each event type adds its own fields.
 * `id` is unique and stays the same if the event is sent again (outbox replay after a crash).
 */
export interface EventBase {
  readonly id: string;
  /** ISO 8601 UTC timestamp. */
  readonly ts: string;
  /** machine.id from the config. */
  readonly asset: string;
  readonly type: string;
  /** warning levels let subscribers filter; "alarm" events must never be dropped. */
  readonly severity: 'info' | 'warning' | 'alarm';
}

export type AgentEvent = EventBase & Record<string, unknown>;

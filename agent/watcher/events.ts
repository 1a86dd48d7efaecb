import type { WindowResult } from '../dsp/types.js';
import type { AgentEvent, EventBase } from '../events.js';

/** The watcher's event types. */
export type WatcherEventType =
  | 'zone_changed'
  | 'alarm_level_exceeded'
  | 'alarm_level_cleared'
  | 'unbalance_found'
  | 'unbalance_cleared'
  | 'unbalance_kind_changed'
  | 'vector_change'
  | 'vector_change_cleared'
  | 'sensor_not_ok'
  | 'sensor_ok'
  | 'tach_lost'
  | 'tach_back'
  | 'speed_out_of_range'
  | 'speed_in_range'
  | 'state_files_quarantined';

export interface EventOrigin {
  readonly asset: string;
  /** Start counter of the watcher (persisted), so ids stay unique across restarts of the sample clock. */
  readonly run: number;
  readonly window: WindowResult;
  /** ISO 8601 UTC time from the injected clock. */
  readonly ts: string;
}

/**
 * Builds an event. The id is derived from asset, type, subject (sensor id or "machine"), start counter
 * and the window's first sample index: the same event always gets the same id, and no two events share
 * one (one event per type and subject per window).
 */
export function watcherEvent(
  o: EventOrigin,
  type: WatcherEventType,
  subject: string,
  severity: EventBase['severity'],
  fields: Record<string, unknown>,
): AgentEvent {
  return {
    id: `${o.asset}/${type}/${subject}/r${o.run}/${o.window.start_index}`,
    ts: o.ts,
    asset: o.asset,
    type,
    severity,
    ...(subject === 'machine' ? {} : { sensor: subject }),
    window: { start_index: o.window.start_index, end_index: o.window.end_index },
    ...fields,
  };
}

import type { AgentEvent } from '../events.js';
import type { OutboxNotice } from './outbox.js';

/** Turns an outbox notice into an event for the plant (and the log line that goes with it). */
export function eventFromNotice(
  n: OutboxNotice,
  asset: string,
  ts: string,
  id: string,
): AgentEvent {
  const base = { id, ts, asset };
  switch (n.kind) {
    case 'quarantined':
      return {
        ...base,
        type: 'outbox_record_quarantined',
        severity: 'warning',
        message:
          `outbox record ${n.file} is damaged (${n.problem}); ` +
          `${n.moved_to ? `moved to ${n.moved_to} for inspection` : 'it could not be moved aside and is skipped'}; ` +
          `the event it held was not sent`,
        file: n.file,
        moved_to: n.moved_to,
        problem: n.problem,
      };
    case 'store_failed':
      return {
        ...base,
        type: 'outbox_store_failed',
        severity: 'warning',
        message:
          `cannot save events under the state directory (${n.code}: ${n.message}); ` +
          `monitoring continues, events are held in memory and sent when possible, and ` +
          `will be saved once the disk accepts writes again (free space under state_dir)`,
        error_code: n.code,
      };
    case 'store_recovered':
      return {
        ...base,
        type: 'outbox_store_recovered',
        severity: 'info',
        message:
          `events are saved to disk again after ${Math.round(n.failed_for_ms / 1000)} s; ` +
          `${n.saved_late} event(s) held in memory were saved`,
        failed_for_s: n.failed_for_ms / 1000,
        saved_late: n.saved_late,
      };
    case 'overflow_started':
      return {
        ...base,
        type: 'outbox_overflow_started',
        severity: 'warning',
        message:
          `the outbox is full (${n.max_events} events or ${n.max_bytes} bytes): the ` +
          `oldest info events, then warnings, are being dropped; alarms are always kept`,
        max_events: n.max_events,
        max_bytes: n.max_bytes,
      };
    case 'overflow_ended':
      return {
        ...base,
        type: 'outbox_overflow_ended',
        severity: 'warning',
        message:
          `the outbox has room again; ${n.dropped_info} info ` +
          `and ${n.dropped_warning} warning event(s) were ` +
          `dropped over ${Math.round(n.lasted_ms / 1000)} s`,
        dropped_info: n.dropped_info,
        dropped_warning: n.dropped_warning,
        lasted_s: n.lasted_ms / 1000,
      };
  }
}

import { z } from 'zod';
import type { WindowResult } from '../dsp/types.js';
import type { AgentEvent, EventBase } from '../events.js';

/**
 * The watcher's events: one zod schema per type for the fields it adds to the envelope
 * (agent/events.ts). `turnwise mqtt schemas` writes them as
 * config/schemas/mqtt/event-watcher.v1.schema.json.
 */

const zone = z.enum(['A', 'B', 'C', 'D']);
const kind = z.enum(['static', 'couple', 'dynamic', 'overhung', 'none']);
const words = z.array(z.string());
const limits = z
  .object({
    ab_mm_s: z.number(),
    bc_mm_s: z.number(),
    cd_mm_s: z.number(),
    basis: z.string().describe('Where the boundaries come from, in words.'),
    multiplier: z.number().describe('Start-up multiplier in force (1 at running speed).'),
  })
  .strict();
const range = z.object({ min: z.number(), max: z.number() }).strict().nullable();
const pointsTo = z
  .array(z.object({ cause: z.string(), why: z.string() }).strict())
  .describe('Other 1x causes the findings point to, and why.');
const unbalanceFields = {
  kind: kind.describe(
    'Unbalance verdict: static, couple, dynamic, overhung; ' +
      'none when there is no significant unbalance.',
  ),
  confidence: z.enum(['high', 'medium', 'low']),
  evidence: words.describe('Findings in plain words.'),
  limits: words.describe('What the data could not show.'),
};
const vectorFields = {
  delta_mm_s: z
    .number()
    .describe('Size of the 1x vector difference from the baseline, mm/s r.m.s.'),
  amp_change_mm_s: z.number(),
  phase_change_deg: z.number(),
  limit_mm_s: z.number().describe('Reported size of a vector change, mm/s r.m.s.'),
};
const fault = z
  .object({
    code: z.enum([
      'no_data',
      'bias',
      'clipped',
      'pile_up',
      'saturation',
      'spikes',
      'flat',
      'quantisation_only',
      'level_step',
    ]),
    words: z.string(),
  })
  .strict();

export const WATCHER_EVENT_FIELDS = {
  zone_changed: z
    .object({
      scope: z.enum(['sensor', 'machine']),
      zone,
      from_zone: zone.nullable(),
      overall_rms_mm_s: z
        .number()
        .optional()
        .describe('Sensor scope only: the overall that set the zone, mm/s r.m.s.'),
      limits,
      held_below_d_by: z
        .array(z.string())
        .optional()
        .describe(
          'Machine scope: doubtful sensors that alone read zone D; the machine zone is held at C until another sensor agrees.',
        ),
    })
    .strict(),
  alarm_level_exceeded: z
    .object({
      overall_rms_mm_s: z.number(),
      alarm_mm_s: z.number(),
      baseline: z.boolean().describe('The alarm level is baseline-relative.'),
    })
    .strict(),
  alarm_level_cleared: z.object({ overall_rms_mm_s: z.number(), alarm_mm_s: z.number() }).strict(),
  unbalance_found: z.object(unbalanceFields).strict(),
  unbalance_cleared: z
    .object({ ...unbalanceFields, from_kind: kind, points_to: pointsTo })
    .strict(),
  unbalance_kind_changed: z.object({ ...unbalanceFields, from_kind: kind }).strict(),
  vector_change: z.object(vectorFields).strict(),
  vector_change_cleared: z.object(vectorFields).strict(),
  sensor_not_ok: z
    .object({
      problems: words.describe('Why the sensor is not OK, in plain words.'),
      faults: z.array(fault).optional().describe('The same problems as codes.'),
    })
    .strict(),
  sensor_ok: z.object({}).strict(),
  sensor_doubtful: z
    .object({
      doubts: words.describe('What could be a sensor fault or real vibration, in plain words.'),
    })
    .strict(),
  sensor_doubt_cleared: z.object({}).strict(),
  tach_lost: z.object({ why: z.string() }).strict(),
  tach_back: z.object({ why: z.string() }).strict(),
  speed_out_of_range: z
    .object({ speed_rpm: z.number().nullable(), range_rpm: range, why: z.string() })
    .strict(),
  speed_in_range: z.object({ speed_rpm: z.number().nullable(), range_rpm: range }).strict(),
  state_files_quarantined: z
    .object({
      message: z.string(),
      files: z.array(
        z
          .object({ file: z.string(), moved_to: z.string().nullable(), problem: z.string() })
          .strict(),
      ),
    })
    .strict(),
} as const;

/** The watcher's event types. */
export type WatcherEventType = keyof typeof WATCHER_EVENT_FIELDS;
export const WATCHER_EVENT_TYPES = Object.keys(WATCHER_EVENT_FIELDS) as WatcherEventType[];
export type WatcherEventFields<T extends WatcherEventType> = z.input<
  (typeof WATCHER_EVENT_FIELDS)[T]
>;

export type FaultCode = z.infer<typeof fault>['code'];

export interface EventOrigin {
  readonly asset: string;
  /**
   * Start counter of the watcher (persisted), so ids stay unique across restarts of the sample
   * clock.
   */
  readonly run: number;
  readonly window: WindowResult;
  /** ISO 8601 UTC time from the injected clock. */
  readonly ts: string;
}

/**
 * Builds an event. The id is derived from asset, type, subject (sensor id or "machine"), start
 * counter and the window's first sample index: the same event always gets the same id, and no two
 * events share one (one event per type and subject per window).
 */
export function watcherEvent<T extends WatcherEventType>(
  o: EventOrigin,
  type: T,
  subject: string,
  severity: EventBase['severity'],
  fields: WatcherEventFields<T>,
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

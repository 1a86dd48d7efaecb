import { z } from 'zod';
import { WATCHER_EVENT_FIELDS, WATCHER_EVENT_TYPES } from '../watcher/events.js';

/**
 * Every MQTT payload the agent publishes or accepts, as zod schemas. Each payload names its own
 * schema and version in the `schema` field (e.g. "turnwise.status.v1"); a change that could break
 * a subscriber gets a new version. The JSON Schema files under config/schemas/mqtt/ are generated
 * from these (`turnwise mqtt schemas --out config/schemas/mqtt`); a test keeps them in step.
 */

const isoTs = z.iso.datetime({ offset: true }).describe('ISO 8601 time, UTC.');
const asset = z.string().min(1).max(64).describe('machine.id of the fan.');
const count = z.number().int().min(0);
const severity = z.enum(['info', 'warning', 'alarm']);
const zone = z.enum(['A', 'B', 'C', 'D']);

export const SCHEMA_IDS = {
  status: 'turnwise.status.v1',
  heartbeat: 'turnwise.heartbeat.v1',
  event: 'turnwise.event.v1',
  live: 'turnwise.live.v1',
  command: 'turnwise.cmd.v1',
  reply: 'turnwise.cmd-reply.v1',
} as const;

export const statusPayload = z
  .object({
    schema: z.literal(SCHEMA_IDS.status),
    asset,
    online: z.boolean(),
    reason: z
      .enum(['connected', 'stopped', 'connection lost'])
      .describe('"connection lost" is the last-will the broker publishes when the agent vanishes.'),
    session_started_ts: isoTs.describe(
      'When this broker session began (the same in the online message and its last-will).',
    ),
    agent_version: z.string(),
  })
  .strict()
  .describe('Retained on <prefix>/<asset>/status, QoS 1.');

const outboxHealth = z
  .object({
    pending: count,
    pending_bytes: count,
    memory_only: count.describe('Pending events only in memory because the disk refused them.'),
    store_ok: z.boolean(),
    full: z.boolean(),
    dropped_info_total: count,
    dropped_warning_total: count,
    quarantined_total: count,
    store_failures_total: count,
  })
  .strict();

const linkHealth = z
  .object({
    connects_total: count,
    connect_failures_total: count,
    events_published_total: count,
    publish_timeouts_total: count,
    live_sent_total: count,
    live_skipped_total: count.describe(
      'Live messages not sent: offline or the socket was backed up.',
    ),
    commands_total: count,
    commands_refused_total: count,
  })
  .strict();

const healthValue = z.union([z.number(), z.string(), z.boolean(), z.null()]);
const optCount = (d: string) => count.optional().describe(d);

/**
 * The `agent` part of the heartbeat: a flat record of scalars. The fields below are the ones the
 * agent writes today, all optional; further fields may appear (each stage adds its own, with a
 * prefix), so subscribers validating against an older copy of this schema keep working.
 */
const agentHealth = z
  .object({
    windows: optCount('Analysis windows closed since the agent started.'),
    gaps: optCount(
      'Gap markers the measurement loop received from the source ' +
        'since the agent started (samples lost before the DSP).',
    ),
    events: optCount('Events raised since the agent started.'),
    last_window_revolutions: count
      .nullable()
      .optional()
      .describe('Revolutions averaged in the last closed window; null before the first window.'),
    last_window_revolutions_rejected: count
      .nullable()
      .optional()
      .describe(
        'Revolutions thrown away in the last window (missing pulse, gap, speed outside limits).',
      ),
    captures_written: count
      .optional()
      .describe('Event captures written under state_dir/captures since start.'),
    captures_failed: count
      .optional()
      .describe(
        'Event captures that could not be written (full ' +
          'disk...); the log says why, once per burst.',
      ),
    captures_removed: count
      .optional()
      .describe('Old event captures removed to stay within capture.max_count and capture.max_mb.'),
    sweeps_recorded: count
      .optional()
      .describe('Run-ups and coast-downs stored under state_dir/sweeps since start.'),
    sweeps_failed: count
      .optional()
      .describe(
        'Sweeps that could not be written (full disk...); the log says why, once per burst.',
      ),
    sweeps_removed: count
      .optional()
      .describe(
        'Old sweeps removed to stay within sweep.max_count and sweep.max_mb (never the reference).',
      ),
    last_window_speed_rpm: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Mean speed of the last window from the tach channel, ' +
          'r/min; null when no revolution was averaged.',
      ),
    source_connected: z.boolean().optional().describe('Serial board: the device is open.'),
    source_device: z.string().optional().describe('Serial board: device path.'),
    source_bytes_received: optCount('Serial board: bytes read.'),
    source_frames_ok: optCount('Serial board: frames accepted.'),
    source_crc_errors: optCount('Serial board: frames with a bad CRC-32.'),
    source_bad_lengths: optCount('Serial board: frames with an impossible length.'),
    source_bad_headers: optCount('Serial board: frames with a bad header.'),
    source_rejected_frames: optCount(
      'Serial board: intact frames refused (wrong rate or channel count).',
    ),
    source_resyncs: optCount('Serial board: times the decoder searched for the next sync bytes.'),
    source_bytes_skipped: optCount('Serial board: bytes skipped while resynchronising.'),
    source_gaps: optCount('Serial board: gaps reported (lost frames, overruns).'),
    source_samples_lost: optCount('Serial board: samples per channel lost in gaps.'),
    source_sequence_anomalies: optCount('Serial board: sequence numbers out of order.'),
    source_clock_restarts: optCount('Serial board: sample clock restarted (board reset).'),
    source_timing_faults: optCount(
      'Serial board: version 2 frames with an impossible ' +
        'timing declaration (used with the last good one).',
    ),
    source_protocol_version: count
      .nullable()
      .optional()
      .describe(
        'Serial board: protocol version of the last good frame (1, ' +
          'or 2 with a timing declaration); null before the first.',
      ),
    source_sample_delay_ticks: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Serial board: declared ADC delay in use, sample ' +
          'periods; null when not declared (version 1).',
      ),
    source_tach_delay_ticks: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Serial board: declared delay of the board-timed ' +
          'tach edges, sample periods; null when not declared.',
      ),
    source_max_skew_ticks: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Serial board: largest declared channel skew, sample periods ' +
          '(0: all channels simultaneous); null when not declared.',
      ),
    source_tach_mode_mismatches: optCount(
      'Serial board: frames whose tach timing disagrees with acquisition.board_tach_edges.',
    ),
    source_last_gap_from_index: count
      .nullable()
      .optional()
      .describe(
        'Serial board: first missing sample index of the ' +
          'last gap (agent sample clock); null before any gap.',
      ),
    source_last_gap_to_index: count
      .nullable()
      .optional()
      .describe(
        'Serial board: first sample index present again after the last gap; null before any gap.',
      ),
    source_last_gap_reason: z
      .string()
      .nullable()
      .optional()
      .describe('Serial board: why the last gap happened, in words.'),
    source_modem_lines: z
      .string()
      .nullable()
      .optional()
      .describe('Serial board: DTR and RTS after opening: "asserted", or why not.'),
    source_overruns: optCount('Serial board: frames dropped because the DSP fell behind.'),
    source_stalls: optCount(
      'Serial board: an open device went silent for stall_timeout_ms and was reopened.',
    ),
    source_reconnects: optCount('Serial board: successful reopenings after the first open.'),
    source_open_failures: optCount('Serial board: failed attempts to open the device.'),
    source_last_error: z
      .string()
      .nullable()
      .optional()
      .describe('Serial board: the last problem, in words.'),
    source_last_error_at: z
      .string()
      .nullable()
      .optional()
      .describe('Serial board: when the last problem happened, ISO 8601 UTC.'),
    time_anchors: optCount(
      'Times the sample clock was anchored to the wall clock: ' +
        '1 at start, +1 per board restart or wall-clock step.',
    ),
    wall_clock_steps_back: optCount(
      'Live board: the wall clock stepped back against the sample ' +
        'clock by more than the tolerance (times re-anchored).',
    ),
    wall_clock_steps_forward: optCount(
      'Live board: the wall clock stepped forward against the sample ' +
        'clock for a whole second of samples (times re-anchored).',
    ),
    time_latency_ms: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Live board: arrival of the last block minus its ' +
          'stamped time, ms; null for recordings and simulations.',
      ),
    time_slew_ms: z
      .number()
      .optional()
      .describe(
        'Live board: correction slewed into the time anchor since ' +
          'it was set, ms (the board crystal against the wall clock).',
      ),
    gpio_speed_rpm: z
      .number()
      .nullable()
      .optional()
      .describe(
        'Speed from the GPIO tach input (gpio.tach_speed), ' +
          'r/min; speed only, never phase; null when unknown.',
      ),
    gpio_speed_check: z
      .enum(['agree', 'stopped', 'mismatch', 'tach_lost', 'gpio_silent'])
      .nullable()
      .optional()
      .describe(
        'GPIO speed against the tach channel at the last window: agree, stopped ' +
          '(neither turns), mismatch (beyond tolerance_pct), tach_lost (tach channel ' +
          'gave no speed, GPIO says it turns), gpio_silent; null before the first window.',
      ),
    gpio_speed_disagreements_total: optCount('Windows judged mismatch, tach_lost or gpio_silent.'),
    gpio_tach_edges_total: optCount('Rising edges seen on the GPIO tach input.'),
    gpio_tach_double_triggers_total: optCount('GPIO tach edges ignored as faster than max_rpm.'),
    gpio_tach_dropouts_total: optCount(
      'GPIO tach intervals slower than min_rpm (stopped shaft or lost pulses).',
    ),
    advisory_state: z
      .enum(['normal', 'raised', 'acknowledged', 'latched'])
      .optional()
      .describe('Safe-stop advisory state (see event-advisory.v1).'),
    advisory_outputs_energised: z
      .boolean()
      .optional()
      .describe('Relay and lamp energised (true = all well).'),
    advisory_output_fault: z.boolean().optional().describe('Writing the relay or lamp failed.'),
    advisory_stalled: z
      .boolean()
      .optional()
      .describe('No measurement reached the advisory for advisory.stall_s.'),
    advisory_raised_total: optCount('Times the advisory was raised since the agent started.'),
    advisory_acknowledged_total: optCount('Acknowledgements since the agent started.'),
    advisory_bearings_without_vote: z
      .string()
      .nullable()
      .optional()
      .describe('Comma-separated bearings with too few OK voting channels; null when none.'),
    event_log_written_total: optCount(
      'Events written to the event log under state_dir (turnwise events) since the agent started.',
    ),
    event_log_failed_total: optCount(
      'Events the event log could not write (disk full, permissions).',
    ),
    event_log_ok: z.boolean().optional().describe('The last write to the event log worked.'),
    mqtt_protocol_version: z
      .union([z.literal(4), z.literal(5)])
      .optional()
      .describe('MQTT level of the JSON session: 5, or 4 (3.1.1) when the broker does not take 5.'),
    mqtt_refused_too_large_total: optCount(
      "Messages not sent because they were over the broker's maximum packet " +
        'size (each event so refused gets an mqtt_payload_refused event).',
    ),
    mqtt_stuck_replaced_total: optCount(
      'Clients replaced by the liveness check (stuck neither connecting nor closing).',
    ),
    sparkplug_connected: z
      .boolean()
      .optional()
      .describe('Sparkplug session connected (mqtt.sparkplug).'),
    sparkplug_born: z
      .boolean()
      .optional()
      .describe(
        'Sparkplug births published in this session (false while waiting for the primary host).',
      ),
    sparkplug_primary_host_online: z
      .boolean()
      .nullable()
      .optional()
      .describe(
        'Last STATE of the primary host; null without primary_host_id or before any STATE.',
      ),
    sparkplug_bdseq: z
      .number()
      .int()
      .min(0)
      .max(255)
      .optional()
      .describe('bdSeq of the current Sparkplug CONNECT.'),
    sparkplug_births_total: optCount('NBIRTH+DBIRTH sequences published (connects and rebirths).'),
    sparkplug_events_sent_total: optCount('Events sent as the Sparkplug Event metric.'),
    sparkplug_commands_refused_total: optCount(
      'NCMD/DCMD metrics refused (unknown, not writable, malformed).',
    ),
  })
  .catchall(healthValue)
  .describe(
    'Health figures of the other stages: measurement loop, acquisition source ' +
      '(source_*, whatever fields the source reports), GPIO tach input (gpio_*), advisory ' +
      '(advisory_*), event log (event_log_*), MQTT sessions (mqtt_*, sparkplug_*).',
  );

export const heartbeatPayload = z
  .object({
    schema: z.literal(SCHEMA_IDS.heartbeat),
    asset,
    ts: isoTs,
    uptime_s: z.number().min(0),
    connected_s: z.number().min(0).describe('Time since this broker session began, s.'),
    outbox: outboxHealth,
    mqtt: linkHealth,
    agent: agentHealth,
  })
  .strict()
  .describe('<prefix>/<asset>/heartbeat, QoS 0, every mqtt.heartbeat_s.');

/** The envelope of agent/events.ts; each event type adds its own fields. */
export const eventPayload = z
  .looseObject({
    schema: z.literal(SCHEMA_IDS.event),
    id: z
      .string()
      .min(1)
      .max(128)
      .describe('Unique; the same when the event is sent again after a crash.'),
    ts: isoTs,
    asset,
    type: z.string().regex(/^[A-Za-z0-9_.-]{1,64}$/),
    severity,
  })
  .describe(
    '<prefix>/<asset>/event/<type>, QoS 1, from the ' +
      'durable outbox. Further fields depend on the type.',
  );

/** Fields the advisory adds to the envelope (types advisory_*). */
export const advisoryEventPayload = eventPayload
  .extend({
    type: z.enum([
      'advisory_started',
      'advisory_raised',
      'advisory_acknowledged',
      'advisory_cleared',
      'advisory_coverage',
      'advisory_output_fault',
      'advisory_stalled',
      'advisory_resumed',
    ]),
    state: z
      .enum(['normal', 'raised', 'acknowledged', 'latched'])
      .describe(
        'normal: outputs energised; raised: condition met, not acknowledged; acknowledged: ' +
          'condition still met; latched: condition gone, waiting for acknowledgement.',
      ),
    outputs_energised: z.boolean().describe('Relay and lamp energised (true = all well).'),
    message: z.string(),
    bearing: z.string().optional(),
    channels: z.array(z.string()).optional().describe('Sensor ids that voted.'),
    acknowledged_by: z.string().optional(),
    bearings_without_vote: z
      .array(z.string())
      .optional()
      .describe(
        'Bearings with fewer OK voting channels than ' +
          'advisory.min_channels: the advisory cannot be raised for them.',
      ),
  })
  .describe('Advisory events (a subset of turnwise.event.v1).');

/** Fields the outbox adds to the envelope (types outbox_*). */
export const outboxEventPayload = eventPayload
  .extend({
    type: z.enum([
      'outbox_record_quarantined',
      'outbox_store_failed',
      'outbox_store_recovered',
      'outbox_overflow_started',
      'outbox_overflow_ended',
    ]),
    message: z.string(),
    file: z.string().optional(),
    moved_to: z.string().nullable().optional(),
    problem: z.string().optional(),
    error_code: z.string().optional(),
    failed_for_s: z.number().optional(),
    saved_late: count.optional(),
    max_events: count.optional(),
    max_bytes: count.optional(),
    dropped_info: count.optional(),
    dropped_warning: count.optional(),
    lasted_s: z.number().optional(),
  })
  .describe('Outbox events (a subset of turnwise.event.v1).');

/** The watcher's events (agent/watcher/events.ts): the envelope plus each type's own fields. */
const watcherEnvelope = {
  schema: z.literal(SCHEMA_IDS.event),
  id: z.string().min(1).max(128),
  ts: isoTs,
  asset,
  severity,
  sensor: z.string().optional().describe('The sensor the event is about; absent for the machine.'),
  window: z
    .object({ start_index: count, end_index: count })
    .strict()
    .describe('Sample-clock indices of the window that confirmed it.'),
};
export const watcherEventPayload = z
  .discriminatedUnion(
    'type',
    WATCHER_EVENT_TYPES.map((type) =>
      WATCHER_EVENT_FIELDS[type].extend({ ...watcherEnvelope, type: z.literal(type) }),
    ) as unknown as [z.ZodObject, ...z.ZodObject[]],
  )
  .describe('Watcher events (a subset of turnwise.event.v1), one shape per type.');

export const livePayload = z
  .object({
    schema: z.literal(SCHEMA_IDS.live),
    asset,
    ts: isoTs,
    speed_rpm: z.number().nullable(),
    channels: z.array(
      z
        .object({
          id: z.string(),
          bearing: z.string(),
          direction: z.enum(['vertical', 'horizontal', 'axial']),
          overall_rms_mm_s: z.number().nullable(),
          one_x_amp_pk_mm_s: z.number().nullable(),
          one_x_phase_deg: z.number().min(0).max(360).nullable(),
          zone: zone.nullable(),
          ok: z.boolean().nullable().describe('Sensor judged healthy; null when not judged.'),
        })
        .strict(),
    ),
  })
  .strict()
  .describe('<prefix>/<asset>/live, QoS 0, at most every mqtt.live_interval_s.');

const note = z.string().max(500).optional();
const noArgs = z.object({ note }).strict().default({});
const commandEnvelope = {
  schema: z.literal(SCHEMA_IDS.command).optional(),
  id: z.string().min(1).max(128).describe('Correlation id, echoed in the reply.'),
  token: z.string().min(1).max(512).describe('The command token (mqtt.commands.token).'),
};
export const commandPayload = z
  .discriminatedUnion('cmd', [
    z
      .object({
        ...commandEnvelope,
        cmd: z.literal('advisory.ack'),
        args: z
          .object({ by: z.string().min(1).max(64).describe('Who acknowledges.'), note })
          .strict(),
      })
      .strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('baseline.start'), args: noArgs }).strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('baseline.stop'), args: noArgs }).strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('snapshot.take'), args: noArgs }).strict(),
    z
      .object({ ...commandEnvelope, cmd: z.literal('capture.take'), args: noArgs })
      .strict()
      .describe(
        'Writes an event capture (raw samples around now) ' +
          'under state_dir/captures; the reply names its id.',
      ),
    z
      .object({
        ...commandEnvelope,
        cmd: z.literal('balancing.session'),
        args: z
          .object({
            action: z.enum(['start', 'status', 'abort']),
            params: z
              .record(z.string(), z.unknown())
              .optional()
              .describe('Passed to the balancing workbench, which checks them.'),
          })
          .strict(),
      })
      .strict(),
  ])
  .describe('<prefix>/<asset>/cmd, QoS 1.');
export const COMMANDS = [
  'advisory.ack',
  'baseline.start',
  'baseline.stop',
  'snapshot.take',
  'capture.take',
  'balancing.session',
] as const;
export type CommandName = (typeof COMMANDS)[number];

export const REPLY_ERRORS = [
  'malformed',
  'unauthorised',
  'unknown_command',
  'invalid_args',
  'unavailable',
  'rejected',
  'failed',
  'too_large',
] as const;
export const replyPayload = z
  .discriminatedUnion('ok', [
    z
      .object({
        schema: z.literal(SCHEMA_IDS.reply),
        asset,
        ts: isoTs,
        id: z.string().nullable(),
        cmd: z.string().nullable(),
        ok: z.literal(true),
        result: z.record(z.string(), z.unknown()),
      })
      .strict(),
    z
      .object({
        schema: z.literal(SCHEMA_IDS.reply),
        asset,
        ts: isoTs,
        id: z
          .string()
          .nullable()
          .describe('Correlation id of the command; null when it had no readable id.'),
        cmd: z.string().nullable(),
        ok: z.literal(false),
        error: z.object({ code: z.enum(REPLY_ERRORS), message: z.string() }).strict(),
      })
      .strict(),
  ])
  .describe('<prefix>/<asset>/cmd/reply, QoS 1, one per command.');

export type StatusPayload = z.infer<typeof statusPayload>;
export type HeartbeatPayload = z.infer<typeof heartbeatPayload>;
export type LivePayload = z.infer<typeof livePayload>;
export type CommandPayload = z.infer<typeof commandPayload>;
export type ReplyPayload = z.infer<typeof replyPayload>;
export type ReplyErrorCode = (typeof REPLY_ERRORS)[number];
export type LinkHealth = z.infer<typeof linkHealth>;

/** Schema file name (without folder) -> zod schema. */
export const PAYLOAD_SCHEMAS: ReadonlyArray<readonly [string, z.ZodType]> = [
  ['status.v1.schema.json', statusPayload],
  ['heartbeat.v1.schema.json', heartbeatPayload],
  ['event.v1.schema.json', eventPayload],
  ['event-advisory.v1.schema.json', advisoryEventPayload],
  ['event-outbox.v1.schema.json', outboxEventPayload],
  ['event-watcher.v1.schema.json', watcherEventPayload],
  ['live.v1.schema.json', livePayload],
  ['cmd.v1.schema.json', commandPayload],
  ['cmd-reply.v1.schema.json', replyPayload],
];

/** The JSON Schema text of each payload, as committed under config/schemas/mqtt/. */
export function renderPayloadSchemas(): Map<string, string> {
  const out = new Map<string, string>();
  for (const [name, schema] of PAYLOAD_SCHEMAS) {
    const json = z.toJSONSchema(schema, { target: 'draft-2020-12', io: 'input' }) as Record<
      string,
      unknown
    >;
    out.set(
      name,
      JSON.stringify(
        {
          $id: `https://turnwise.invalid/schemas/mqtt/${name}`,
          title: name.replace('.schema.json', ''),
          ...json,
        },
        null,
        2,
      ) + '\n',
    );
  }
  return out;
}

import { z } from 'zod';

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
    reason: z.enum(['connected', 'stopped', 'connection lost']).describe('"connection lost" is the last-will the broker publishes when the agent vanishes.'),
    session_started_ts: isoTs.describe('When this broker session began (the same in the online message and its last-will).'),
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
    live_skipped_total: count.describe('Live messages not sent: offline or the socket was backed up.'),
    commands_total: count,
    commands_refused_total: count,
  })
  .strict();

export const heartbeatPayload = z
  .object({
    schema: z.literal(SCHEMA_IDS.heartbeat),
    asset,
    ts: isoTs,
    uptime_s: z.number().min(0),
    connected_s: z.number().min(0).describe('Time since this broker session began, s.'),
    outbox: outboxHealth,
    mqtt: linkHealth,
    agent: z.record(z.string(), z.union([z.number(), z.string(), z.boolean(), z.null()])).describe('Health figures of the other stages (watcher, advisory, source).'),
  })
  .strict()
  .describe('<prefix>/<asset>/heartbeat, QoS 0, every mqtt.heartbeat_s.');

/** The envelope of agent/events.ts; each event type adds its own fields. */
export const eventPayload = z
  .looseObject({
    schema: z.literal(SCHEMA_IDS.event),
    id: z.string().min(1).max(128).describe('Unique; the same when the event is sent again after a crash.'),
    ts: isoTs,
    asset,
    type: z.string().regex(/^[A-Za-z0-9_.-]{1,64}$/),
    severity,
  })
  .describe('<prefix>/<asset>/event/<type>, QoS 1, from the durable outbox. Further fields depend on the type.');

/** Fields the advisory adds to the envelope (types advisory_*). */
export const advisoryEventPayload = eventPayload
  .extend({
    type: z.enum(['advisory_started', 'advisory_raised', 'advisory_acknowledged', 'advisory_cleared', 'advisory_coverage', 'advisory_output_fault', 'advisory_stalled', 'advisory_resumed']),
    state: z.enum(['normal', 'raised', 'acknowledged', 'latched']).describe('normal: outputs energised; raised: condition met, not acknowledged; acknowledged: condition still met; latched: condition gone, waiting for acknowledgement.'),
    outputs_energised: z.boolean().describe('Relay and lamp energised (true = all well).'),
    message: z.string(),
    bearing: z.string().optional(),
    channels: z.array(z.string()).optional().describe('Sensor ids that voted.'),
    acknowledged_by: z.string().optional(),
    bearings_without_vote: z.array(z.string()).optional().describe('Bearings with fewer OK voting channels than advisory.min_channels: the advisory cannot be raised for them.'),
  })
  .describe('Advisory events (a subset of turnwise.event.v1).');

/** Fields the outbox adds to the envelope (types outbox_*). */
export const outboxEventPayload = eventPayload
  .extend({
    type: z.enum(['outbox_record_quarantined', 'outbox_store_failed', 'outbox_store_recovered', 'outbox_overflow_started', 'outbox_overflow_ended']),
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
    z.object({ ...commandEnvelope, cmd: z.literal('advisory.ack'), args: z.object({ by: z.string().min(1).max(64).describe('Who acknowledges.'), note }).strict() }).strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('baseline.start'), args: noArgs }).strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('baseline.stop'), args: noArgs }).strict(),
    z.object({ ...commandEnvelope, cmd: z.literal('snapshot.take'), args: noArgs }).strict(),
    z
      .object({
        ...commandEnvelope,
        cmd: z.literal('balancing.session'),
        args: z
          .object({
            action: z.enum(['start', 'status', 'abort']),
            params: z.record(z.string(), z.unknown()).optional().describe('Passed to the balancing workbench, which checks them.'),
          })
          .strict(),
      })
      .strict(),
  ])
  .describe('<prefix>/<asset>/cmd, QoS 1.');
export const COMMANDS = ['advisory.ack', 'baseline.start', 'baseline.stop', 'snapshot.take', 'balancing.session'] as const;
export type CommandName = (typeof COMMANDS)[number];

export const REPLY_ERRORS = ['malformed', 'unauthorised', 'unknown_command', 'invalid_args', 'unavailable', 'rejected', 'failed', 'too_large'] as const;
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
        id: z.string().nullable().describe('Correlation id of the command; null when it had no readable id.'),
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
  ['live.v1.schema.json', livePayload],
  ['cmd.v1.schema.json', commandPayload],
  ['cmd-reply.v1.schema.json', replyPayload],
];

/** The JSON Schema text of each payload, as committed under config/schemas/mqtt/. */
export function renderPayloadSchemas(): Map<string, string> {
  const out = new Map<string, string>();
  for (const [name, schema] of PAYLOAD_SCHEMAS) {
    const json = z.toJSONSchema(schema, { target: 'draft-2020-12', io: 'input' }) as Record<string, unknown>;
    out.set(name, JSON.stringify({ $id: `https://turnwise.invalid/schemas/mqtt/${name}`, title: name.replace('.schema.json', ''), ...json }, null, 2) + '\n');
  }
  return out;
}

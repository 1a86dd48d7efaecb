import { z } from 'zod';

/**
 * The `mqtt` section: how the agent reaches the plant broker. Optional: without it the agent runs
 * with the local advisory only. Secrets never sit in this file; it names a file (mode 600) or an
 * environment variable that holds them.
 */

const topicLevel = /^[^/+#\u0000]+$/;
const envName = z
  .string()
  .regex(/^[A-Za-z_][A-Za-z0-9_]*$/, 'an environment variable name (letters, digits, "_")');
const filePath = z.string().min(1);

function checkUrl(url: string, ctx: z.RefinementCtx): void {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    ctx.addIssue({
      code: 'custom',
      message:
        'not a URL; write e.g. mqtt://broker.plant.local:1883 or mqtts://broker.plant.local:8883',
    });
    return;
  }
  if (u.protocol !== 'mqtt:' && u.protocol !== 'mqtts:') {
    ctx.addIssue({
      code: 'custom',
      message: `scheme "${u.protocol.replace(/:$/, '')}" is not supported; use mqtt:// or mqtts://`,
    });
  }
  if (u.username || u.password) {
    ctx.addIssue({
      code: 'custom',
      message:
        'credentials must not be written in the URL; use ' +
        'mqtt.username with mqtt.password_file or mqtt.password_env',
    });
  }
  if (!u.hostname) ctx.addIssue({ code: 'custom', message: 'the URL has no host' });
}

const secretRef = (what: string) =>
  z
    .object({
      file: filePath
        .optional()
        .describe(
          `File holding the ${what} (one line). Must not ` +
            `be readable by group or others (chmod 600).`,
        ),
      env: envName.optional().describe(`Environment variable holding the ${what}.`),
    })
    .strict();

/**
 * Sparkplug B ids (group, edge node, device, host): the specification (Sparkplug 3.0, "Topic
 * Namespace Elements",
 * tck-id-topic-structure-namespace-valid-group-id / -edge-node-id / -device-id) allows any UTF-8
 * string except the reserved characters "+", "/" and "#". The agent also refuses the empty string,
 * NUL (not allowed in MQTT topics) and surrounding spaces (a copy-paste slip, never meant).
 */
export function sparkplugIdProblem(id: string): string | null {
  if (id.length === 0) return 'must not be empty';
  const bad = [...new Set([...id].filter((ch) => ch === '+' || ch === '/' || ch === '#'))];
  if (bad.length > 0)
    return (
      `contains ${bad.map((c) => `"${c}"`).join(', ')}, which the Sparkplug specification ` +
      `reserves (no "+", "/" or "#" in a group, edge node, device or host id)`
    );
  if (id.includes('\u0000')) return 'contains a NUL character, which MQTT topics cannot carry';
  if (id.trim() !== id) return 'starts or ends with a space';
  return null;
}
const sparkplugId = (what: string) =>
  z
    .string()
    .max(128)
    .superRefine((v, ctx) => {
      const p = sparkplugIdProblem(v);
      if (p)
        ctx.addIssue({
          code: 'custom',
          message:
            `${what} ${JSON.stringify(v)} ${p}; choose another ` +
            `id (letters, digits, "-", "_", "." are always safe)`,
        });
    });

export const sparkplugSchema = z
  .object({
    group_id: sparkplugId('group_id').describe(
      'Sparkplug group id: topics are spBv1.0/<group_id>/<message ' +
        'type>/<edge_node_id>[/<device_id>].',
    ),
    edge_node_id: sparkplugId('edge_node_id').describe(
      'Sparkplug edge node id of this board; unique within the group.',
    ),
    device_id: sparkplugId('device_id')
      .optional()
      .describe('Sparkplug device id of the fan (one device per asset). Default: machine.id.'),
    primary_host_id: sparkplugId('primary_host_id')
      .optional()
      .describe(
        'Sparkplug host id of the primary host application. When given, the ' +
          'node publishes its births only after spBv1.0/STATE/<primary_host_id> ' +
          'says online, and goes quiet when it goes offline.',
      ),
    client_id: z
      .string()
      .regex(/^[A-Za-z0-9_.-]{1,64}$/, 'letters, digits, "_", "." or "-", at most 64')
      .optional()
      .describe(
        'MQTT client id of the Sparkplug session (its own connection, ' +
          'because the NDEATH is its will). Default: <mqtt client id>-spb.',
      ),
    json_topics: z
      .boolean()
      .default(true)
      .describe(
        'Keep publishing the JSON topics beside Sparkplug (true), or Sparkplug only (false).',
      ),
  })
  .strict();
export type SparkplugConfig = z.infer<typeof sparkplugSchema>;

export const mqttSchema = z
  .object({
    url: z
      .string()
      .superRefine(checkUrl)
      .describe('Broker URL: mqtt://HOST:PORT, or mqtts://HOST:PORT for TLS.'),
    topic_prefix: z
      .string()
      .min(1)
      .max(200)
      .refine(
        (p) => !p.startsWith('$') && p.split('/').every((l) => topicLevel.test(l)),
        'levels separated by "/", none empty, no "+", "#", leading "$" or leading/trailing "/"',
      )
      .describe('Topic prefix; topics are <topic_prefix>/<machine.id>/...'),
    client_id: z
      .string()
      .regex(/^[A-Za-z0-9_.-]{1,64}$/, 'letters, digits, "_", "." or "-", at most 64')
      .optional()
      .describe('MQTT client id. Default: turnwise-<machine.id>.'),
    username: z.string().min(1).max(256).optional(),
    password: secretRef('broker password').optional(),
    tls: z
      .object({
        ca_file: filePath
          .optional()
          .describe(
            'PEM file of the CA that signed the broker certificate. Default: the system CAs.',
          ),
        cert_file: filePath
          .optional()
          .describe('PEM client certificate, when the broker asks for one.'),
        key_file: filePath
          .optional()
          .describe('PEM private key of the client certificate (mode 600).'),
        servername: z
          .string()
          .optional()
          .describe('Name to check in the broker certificate, when it differs from the URL host.'),
      })
      .strict()
      .optional(),
    keepalive_s: z.number().int().min(5).max(1200).default(30),
    connect_timeout_s: z
      .number()
      .min(1)
      .max(300)
      .default(10)
      .describe('How long one connection attempt may take before it counts as failed, s.'),
    publish_timeout_s: z
      .number()
      .min(1)
      .max(600)
      .default(15)
      .describe(
        'An event not acknowledged (PUBACK) within this time ' +
          'makes the agent drop and rebuild the connection, s.',
      ),
    inflight_window: z
      .number()
      .int()
      .min(1)
      .max(100)
      .default(8)
      .describe('Events published and not yet acknowledged at any time.'),
    reconnect_min_s: z
      .number()
      .min(0.05)
      .max(600)
      .default(1)
      .describe('First delay before reconnecting; doubles after each failure, s.'),
    reconnect_max_s: z
      .number()
      .min(0.05)
      .max(3600)
      .default(60)
      .describe('Longest delay between reconnect attempts, s.'),
    heartbeat_s: z
      .number()
      .min(1)
      .max(3600)
      .default(30)
      .describe('Period of the heartbeat message, s.'),
    live_interval_s: z
      .number()
      .min(0)
      .max(3600)
      .default(1)
      .describe('Shortest interval between live messages (QoS 0), s; 0 turns live messages off.'),
    outbox_max_events: z
      .number()
      .int()
      .min(10)
      .max(1_000_000)
      .default(5000)
      .describe('Most events kept waiting in the outbox.'),
    outbox_max_mb: z
      .number()
      .min(0.1)
      .max(1024)
      .default(8)
      .describe('Most event bytes kept waiting in the outbox, MiB.'),
    commands: z
      .object({ token: secretRef('command token') })
      .strict()
      .optional()
      .describe(
        'Accept commands on <prefix>/<asset>/cmd; each must carry this ' +
          'token. Without this key the agent does not listen for commands.',
      ),
    sparkplug: sparkplugSchema
      .optional()
      .describe('Also (or only) speak Sparkplug B 3.0 as an edge node: see docs/sparkplug.md.'),
  })
  .strict()
  .superRefine((m, ctx) => {
    const secure = m.url.startsWith('mqtts:');
    if (m.tls && !secure)
      ctx.addIssue({ code: 'custom', path: ['tls'], message: 'tls settings need an mqtts:// url' });
    if (m.tls && !!m.tls.cert_file !== !!m.tls.key_file) {
      ctx.addIssue({
        code: 'custom',
        path: ['tls', m.tls.cert_file ? 'key_file' : 'cert_file'],
        message: 'cert_file and key_file go together',
      });
    }
    if (m.password && !m.username)
      ctx.addIssue({
        code: 'custom',
        path: ['password'],
        message: 'a password needs mqtt.username',
      });
    const refs: Array<[string[], { file?: string; env?: string } | undefined]> = [
      [['password'], m.password],
      [['commands', 'token'], m.commands?.token],
    ];
    for (const [path, ref] of refs) {
      if (ref && !!ref.file === !!ref.env)
        ctx.addIssue({ code: 'custom', path, message: 'give exactly one of file or env' });
    }
    if (m.reconnect_min_s > m.reconnect_max_s)
      ctx.addIssue({
        code: 'custom',
        path: ['reconnect_min_s'],
        message: 'reconnect_min_s must not exceed reconnect_max_s',
      });
    if (m.live_interval_s > 0 && m.live_interval_s < 0.1)
      ctx.addIssue({
        code: 'custom',
        path: ['live_interval_s'],
        message: 'use 0 (off) or at least 0.1 s',
      });
  });

export type MqttConfig = z.infer<typeof mqttSchema>;

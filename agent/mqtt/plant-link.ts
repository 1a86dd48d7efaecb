import { randomUUID } from 'node:crypto';
import type { MqttConfig } from '../config/mqtt.js';
import type { AgentEvent } from '../events.js';
import type { OutboxFs } from '../outbox/fs.js';
import { eventFromNotice } from '../outbox/notice-events.js';
import { Outbox, type AddOutcome, type OutboxNotice } from '../outbox/outbox.js';
import type { Logger } from '../log.js';
import { CommandRouter, type CommandHandlers } from './commands.js';
import type { LivePayload } from './payloads.js';
import { MqttPublisher, type ConnectFn } from './publisher.js';
import { outboxSettings, resolveMqttSettings } from './settings.js';
import type { SensorConfig } from '../config/schema.js';
import { join } from 'node:path';
import { deviceMetrics, type MetricValue } from './sparkplug/metrics.js';
import { FileBdSeqStore, SparkplugNode } from './sparkplug/node.js';

/**
 * The plant link as `turnwise run` uses it: durable outbox + MQTT publisher + command router,
 * wired together from the `mqtt` config section. Outbox troubles (damaged record, full disk,
 * overflow) are logged once and published as events themselves.
 */
export interface PlantLinkOptions {
  readonly mqtt: MqttConfig;
  /** machine.id */
  readonly asset: string;
  readonly stateDir: string;
  readonly log: Logger;
  /**
   * Command handlers, looked up when each command arrives, so parts started later (advisory,
   * watcher, balancing) can be added to this object afterwards.
   */
  readonly handlers?: CommandHandlers;
  /** Health figures of the other stages for the heartbeat. */
  readonly health?: () => Record<string, number | string | boolean | null>;
  readonly agentVersion?: string;
  readonly env?: NodeJS.ProcessEnv;
  readonly connect?: ConnectFn;
  readonly fs?: OutboxFs;
  readonly now?: () => number;
  /** Sensors of the config: the Sparkplug device's metrics (needed with mqtt.sparkplug). */
  readonly sensors?: readonly SensorConfig[];
}

export interface PlantLink {
  readonly outbox: Outbox;
  /** The JSON-topic publisher; not started when mqtt.sparkplug.json_topics is false. */
  readonly publisher: MqttPublisher;
  /** The Sparkplug B edge node, with mqtt.sparkplug. */
  readonly sparkplug: SparkplugNode | null;
  /** Current metric values for the Sparkplug device (no-op without Sparkplug). */
  updateSparkplug(values: ReadonlyMap<string, MetricValue>): void;
  /** Queues an event durably; never rejects, never waits on the network. */
  queueEvent(event: AgentEvent): Promise<AddOutcome>;
  /** QoS 0 live message, rate-limited; `build` runs only when it will be sent. */
  publishLive(build: () => LivePayload): boolean;
  /** Waits until every queued event is acknowledged (true) or the timeout passes (false). */
  drain(timeoutMs: number): Promise<boolean>;
  /**
   * Publishes the "stopped" status, disconnects, finishes file work. Returns events lost because
   * they were only in memory.
   */
  close(): Promise<number>;
}

/**
 * Opens the outbox and starts publishing. Throws UserError for configuration mistakes (secrets,
 * certificates, state_dir).
 */
export async function openPlantLink(o: PlantLinkOptions): Promise<PlantLink> {
  const settings = resolveMqttSettings(o.mqtt, o.asset, o.env);
  const now = o.now ?? Date.now;
  const ob = outboxSettings(o.mqtt, o.stateDir);
  let publisher: MqttPublisher | null = null;
  const early: OutboxNotice[] = [];
  const onNotice = (n: OutboxNotice): void => {
    if (!publisher) {
      early.push(n);
      return;
    }
    const ev = eventFromNotice(n, o.asset, new Date(now()).toISOString(), randomUUID());
    if (ev.severity === 'info') o.log.info({ notice: n.kind }, String(ev.message));
    else o.log.warn({ notice: n.kind }, String(ev.message));
    void publisher.queueEvent(ev);
  };
  const outbox = await Outbox.open({
    dir: ob.dir,
    maxEvents: ob.maxEvents,
    maxBytes: ob.maxBytes,
    fs: o.fs,
    now,
    onNotice,
  });
  const router = settings.commandToken
    ? new CommandRouter({
        asset: o.asset,
        token: settings.commandToken,
        handlers: o.handlers ?? {},
        log: o.log,
        now,
      })
    : undefined;
  const pub = new MqttPublisher({
    settings,
    asset: o.asset,
    outbox,
    log: o.log,
    commands: router,
    health: o.health,
    connect: o.connect,
    now,
    agentVersion: o.agentVersion,
  });
  publisher = pub;
  early.splice(0).forEach(onNotice);
  const sp = o.mqtt.sparkplug;
  const json = !sp || sp.json_topics;
  let node: SparkplugNode | null = null;
  let spOutbox: Outbox | null = null;
  if (sp) {
    // Its own outbox: an event leaves it when written to the Sparkplug session (QoS 0),
    // independently of the JSON topic's PUBACKs.
    spOutbox = await Outbox.open({
      dir: join(o.stateDir, 'sparkplug-outbox'),
      maxEvents: ob.maxEvents,
      maxBytes: ob.maxBytes,
      fs: o.fs,
      now,
      onNotice: (n) =>
        o.log.warn(
          { notice: n.kind },
          `Sparkplug outbox: ` +
            `${String(eventFromNotice(n, o.asset, new Date(now()).toISOString(), randomUUID()).message)}`,
        ),
    });
    node = new SparkplugNode({
      mqtt: settings,
      ids: {
        groupId: sp.group_id,
        edgeNodeId: sp.edge_node_id,
        deviceId: sp.device_id ?? o.asset,
        primaryHostId: sp.primary_host_id,
        clientId: sp.client_id ?? `${settings.clientId}-spb`,
      },
      metrics: deviceMetrics(o.sensors ?? []),
      outbox: spOutbox,
      bdSeq: new FileBdSeqStore(join(o.stateDir, 'sparkplug-bdseq.json'), o.log),
      log: o.log,
      agentVersion: o.agentVersion,
      connect: o.connect,
      now,
    });
    node.start();
  }
  if (json) pub.start();
  return {
    outbox,
    publisher: pub,
    sparkplug: node,
    updateSparkplug: (v) => node?.update(v),
    async queueEvent(e) {
      const r = node ? node.queueEvent(e) : null;
      if (!json) return r!;
      const out = await pub.queueEvent(e);
      if (r) await r;
      return out;
    },
    publishLive: (b) => (json ? pub.publishLive(b) : false),
    async drain(ms) {
      const [a, b] = await Promise.all([json ? pub.drain(ms) : true, node ? node.drain(ms) : true]);
      return a && b;
    },
    async close() {
      if (json) await pub.stop();
      await node?.stop();
      const lostSp = spOutbox ? await spOutbox.close() : 0;
      return (await outbox.close()) + lostSp;
    },
  };
}

import { connect as mqttConnect, type IPublishPacket, type MqttClient } from 'mqtt';
import { BrokerConnection, type ConnectFn } from './broker-connection.js';
import type { BrokerLimits } from './link-habits.js';
import type { AgentEvent } from '../events.js';
import { waitUntilEmpty, type AddOutcome, type Outbox } from '../outbox/outbox.js';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import {
  SCHEMA_IDS,
  type HeartbeatPayload,
  type LinkHealth,
  type LivePayload,
  type ReplyPayload,
  type StatusPayload,
} from './payloads.js';
import type { MqttSettings } from './settings.js';

export { describeConnectError, type ConnectFn } from './broker-connection.js';

/**
 * Publishes to the plant broker with mqtt.js, on the project's own terms:
 * - the durable outbox is the only queue for events: the client is fed only while connected, with
 *   at most `inflightWindow` unacknowledged QoS 1 messages, and an event is deleted from the outbox
 *   only on its PUBACK; after a reconnect everything unacknowledged is sent again from the oldest;
 * - a fresh client per connection attempt (mqtt.js's own reconnect is switched off): no hidden
 *   in-memory resend, and reconnect runs with exponential backoff and jitter, also after a refused
 *   CONNACK (bad credentials), saying what is wrong once per burst;
 * - a publish not acknowledged within `publishTimeoutMs` tears the connection down and rebuilds it;
 * - MQTT 5 where the broker speaks it (3.1.1 otherwise): the window shrinks to the broker's Receive
 *   Maximum, a message over its Maximum Packet Size is refused here with an event (never sent to be
 *   dropped by the broker, never silently lost), live and heartbeat messages carry a message
 *   expiry, and a command's response topic and correlation data are honoured;
 * - a liveness check replaces a client that is stuck neither connecting nor closing;
 * - nothing here is awaited by the sampling path: `queueEvent` and `publishLive` return at once.
 * The connection itself (attempts, protocol level, broker limits, backoff, liveness, orderly stop)
 * is a BrokerConnection (broker-connection.ts), shared in kind with the Sparkplug node; this class
 * keeps the outbox draining, the in-flight window, heartbeat, live messages, commands and status.
 */

export interface CommandSink {
  handle(raw: Buffer): Promise<ReplyPayload>;
  readonly counts: { readonly total: number; readonly refused: number };
}

export interface PublisherOptions {
  readonly settings: MqttSettings;
  readonly asset: string;
  readonly outbox: Outbox;
  readonly log: Logger;
  /** Command router; without it the agent does not subscribe to the command topic. */
  readonly commands?: CommandSink;
  /** Health figures of the other stages, put into every heartbeat under `agent`. */
  readonly health?: () => Record<string, number | string | boolean | null>;
  readonly connect?: ConnectFn;
  readonly now?: () => number;
  readonly random?: () => number;
  readonly agentVersion?: string;
}

/** QoS 0 live messages are skipped while this many bytes wait in the socket. */
const LIVE_BACKLOG_BYTES = 64 * 1024;

interface InFlight {
  readonly client: MqttClient;
  readonly timer: NodeJS.Timeout;
}

export class MqttPublisher {
  private readonly s: MqttSettings;
  private readonly asset: string;
  private readonly outbox: Outbox;
  private readonly log: Logger;
  private readonly commands?: CommandSink;
  private readonly extraHealth: () => Record<string, number | string | boolean | null>;
  private readonly now: () => number;
  private readonly version: string;
  private readonly burst: BurstLog;
  private readonly conn: BrokerConnection;

  private sessionStartedTs = '';
  private readonly inflight = new Map<number, InFlight>();
  private heartbeatTimer: NodeJS.Timeout | null = null;
  private unsubscribeOutbox: (() => void) | null = null;
  private startedAt = 0;
  private lastLiveAt = -Infinity;
  private started = false;
  private readonly counts = {
    events_published: 0,
    publish_timeouts: 0,
    live_sent: 0,
    live_skipped: 0,
  };
  private maxInflightSeen = 0;

  constructor(opts: PublisherOptions) {
    this.s = opts.settings;
    this.asset = opts.asset;
    this.outbox = opts.outbox;
    this.log = opts.log;
    this.commands = opts.settings.commandToken ? opts.commands : undefined;
    this.extraHealth = opts.health ?? (() => ({}));
    this.now = opts.now ?? Date.now;
    this.version = opts.agentVersion ?? '0.0.0';
    this.burst = new BurstLog(opts.log, { nowMs: this.now, quietMs: Infinity });
    const s = this.s;
    const backoff = () =>
      `with backoff (${s.reconnectMinMs / 1000} s up to ` +
      `${s.reconnectMaxMs / 1000} s); events wait in the outbox`;
    this.conn = new BrokerConnection({
      settings: s,
      clientId: s.clientId,
      log: opts.log,
      connect: opts.connect ?? mqttConnect,
      now: this.now,
      random: opts.random ?? Math.random,
      session: {
        beginAttempt: () => {
          this.sessionStartedTs = new Date(this.now()).toISOString();
        },
        will: () => ({
          topic: s.topics.status,
          payload: Buffer.from(JSON.stringify(this.status(false, 'connection lost'))),
          qos: 1,
          retain: true,
        }),
        limitsKnown: (before) => this.onLimits(before),
        connected: (c) => this.onConnect(c),
        dropped: () => this.dropInflight(),
        message: (c, topic, payload, packet) => this.onMessage(c, topic, payload, packet),
      },
      words: {
        connected: () => ({ message: `connected to ${s.url}`, fields: { client_id: s.clientId } }),
        reconnected: (failures) => `connected to ${s.url} after ${failures} failed attempt(s)`,
        retrying: (wasConnected, reason) =>
          wasConnected
            ? `lost the connection to ${s.url}: ${reason}; reconnecting ${backoff()}`
            : `cannot connect to ${s.url}: ${reason}; retrying ${backoff()}`,
        fallback: (reason) =>
          `the broker at ${s.url} does not take MQTT 5 (${reason}); ` +
          `using MQTT 3.1.1 (no message expiry, no response topics, ` +
          `no broker limits) and trying 5 again in an hour`,
      },
    });
  }

  private get client(): MqttClient | null {
    return this.conn.client;
  }

  private get connected(): boolean {
    return this.conn.connected;
  }

  private get protoVersion(): 4 | 5 {
    return this.conn.protocolVersion;
  }

  /** Starts connecting in the background. Returns at once; the broker may be down. */
  start(): void {
    if (this.started) throw new Error('publisher already started');
    this.started = true;
    this.startedAt = this.now();
    this.unsubscribeOutbox = this.outbox.onChange(() => this.pump());
    this.heartbeatTimer = setInterval(() => this.heartbeat(), this.s.heartbeatMs);
    this.heartbeatTimer.unref();
    this.conn.start();
  }

  /** Adds the payload schema id and queues the event in the durable outbox. Never rejects. */
  queueEvent(event: AgentEvent): Promise<AddOutcome> {
    return this.outbox.add({ schema: SCHEMA_IDS.event, ...event });
  }

  /**
   * Publishes a live message at QoS 0 when connected and at least `liveIntervalMs` after the last
   * one; `build` is only called when the message will be sent. Returns whether it was sent.
   */
  publishLive(build: () => LivePayload): boolean {
    if (this.s.liveIntervalMs <= 0) return false;
    const t = this.now();
    if (t - this.lastLiveAt < this.s.liveIntervalMs) return false;
    const c = this.client;
    const backlog = (c?.stream as { writableLength?: number } | undefined)?.writableLength ?? 0;
    if (!this.connected || !c || backlog > LIVE_BACKLOG_BYTES) {
      this.counts.live_skipped++;
      return false;
    }
    this.lastLiveAt = t;
    const body = JSON.stringify(build());
    if (this.tooLarge(this.s.topics.live, Buffer.byteLength(body), 0, 'live')) {
      this.counts.live_skipped++;
      return false;
    }
    // MQTT 5: a live value older than two intervals is of no use to anyone; the broker may drop it.
    const properties =
      this.protoVersion === 5
        ? { messageExpiryInterval: Math.max(1, Math.ceil((2 * this.s.liveIntervalMs) / 1000)) }
        : undefined;
    c.publish(this.s.topics.live, body, { qos: 0, properties }, () => {});
    this.counts.live_sent++;
    return true;
  }

  isConnected(): boolean {
    return this.connected;
  }

  health(): LinkHealth & { connected: boolean } {
    return {
      connected: this.connected,
      connects_total: this.conn.counts.connects,
      connect_failures_total: this.conn.counts.connectFailures,
      events_published_total: this.counts.events_published,
      publish_timeouts_total: this.counts.publish_timeouts,
      live_sent_total: this.counts.live_sent,
      live_skipped_total: this.counts.live_skipped,
      commands_total: this.commands?.counts.total ?? 0,
      commands_refused_total: this.commands?.counts.refused ?? 0,
    };
  }

  /**
   * What the broker said it takes (MQTT 5 CONNACK), the protocol level of this connection, and the
   * window in force.
   */
  linkInfo(): {
    protocol_version: 4 | 5;
    receive_maximum: number | null;
    maximum_packet_size: number | null;
    inflight_window: number;
    inflight_max_seen: number;
    refused_too_large_total: number;
    stuck_replaced_total: number;
  } {
    return {
      protocol_version: this.protoVersion,
      receive_maximum: this.conn.limits.receiveMaximum,
      maximum_packet_size: this.conn.limits.maximumPacketSize,
      inflight_window: this.window(),
      inflight_max_seen: this.maxInflightSeen,
      refused_too_large_total: this.conn.counts.refusedTooLarge,
      stuck_replaced_total: this.conn.counts.stuckReplaced,
    };
  }

  private window(): number {
    return Math.max(
      1,
      Math.min(this.s.inflightWindow, this.conn.limits.receiveMaximum ?? Infinity),
    );
  }

  /** True (and said once per burst) when a message would pass the broker's Maximum Packet Size. */
  private tooLarge(topic: string, payloadBytes: number, qos: number, what: string): boolean {
    return this.conn.tooLarge(topic, payloadBytes, qos, 16, (size, max) => ({
      message:
        `a ${what} message to ${topic} would be ${size} bytes, over the broker's ` +
        `maximum packet size of ${max} bytes; not sent (the broker would drop ` +
        `the connection). Raise the broker's max_packet_size or send less`,
      kind: what,
    }));
  }

  /** Waits until the outbox is empty (true) or `timeoutMs` has passed (false). */
  drain(timeoutMs: number): Promise<boolean> {
    return waitUntilEmpty(this.outbox, this.now, timeoutMs);
  }

  /** Publishes the retained "stopped" status, disconnects cleanly and stops reconnecting. */
  async stop(): Promise<void> {
    if (this.conn.stopping) return;
    if (this.heartbeatTimer) clearInterval(this.heartbeatTimer);
    this.heartbeatTimer = null;
    this.unsubscribeOutbox?.();
    await this.conn.stop(
      (c) =>
        new Promise<void>((r) =>
          c.publish(
            this.s.topics.status,
            JSON.stringify(this.status(false, 'stopped')),
            { qos: 1, retain: true },
            () => r(),
          ),
        ),
    );
  }

  private status(online: boolean, reason: StatusPayload['reason']): StatusPayload {
    return {
      schema: SCHEMA_IDS.status,
      asset: this.asset,
      online,
      reason,
      session_started_ts: this.sessionStartedTs,
      agent_version: this.version,
    };
  }

  /** The CONNACK's limits, said when they differ from the last ones. */
  private onLimits(before: BrokerLimits): void {
    const limits = this.conn.limits;
    if (
      limits.receiveMaximum !== before.receiveMaximum ||
      limits.maximumPacketSize !== before.maximumPacketSize
    ) {
      this.log.info(
        {
          protocol_version: this.protoVersion,
          receive_maximum: limits.receiveMaximum,
          maximum_packet_size: limits.maximumPacketSize,
        },
        `broker limits (MQTT ${this.protoVersion === 5 ? '5' : '3.1.1'}): ` +
          `receive maximum ${limits.receiveMaximum ?? 'not given'}, maximum ` +
          `packet size ${limits.maximumPacketSize ?? 'not given'}; events ` +
          `in flight at most ${this.window()}`,
      );
    }
  }

  private onConnect(c: MqttClient): void {
    c.publish(
      this.s.topics.status,
      JSON.stringify(this.status(true, 'connected')),
      { qos: 1, retain: true },
      () => {},
    );
    if (this.commands) {
      c.subscribe(this.s.topics.cmd, { qos: 1 }, (err, granted) => {
        if (err || granted?.some((g) => g.qos === 128)) {
          this.burst.report(
            'subscribe',
            `the broker refused the subscription to ${this.s.topics.cmd}; ` +
              `commands will not arrive (check the broker ACL)`,
          );
        }
      });
    }
    this.heartbeat();
    this.pump();
  }

  /** The client is gone: nothing in flight (unacknowledged events are resent from the outbox). */
  private dropInflight(): void {
    for (const f of this.inflight.values()) clearTimeout(f.timer);
    this.inflight.clear();
  }

  /**
   * Feeds the client from the outbox, in order, keeping at most `inflightWindow` unacknowledged.
   */
  private pump(): void {
    const c = this.client;
    if (!this.connected || !c) return;
    const window = this.window();
    for (const ev of this.outbox.sendable()) {
      if (this.inflight.size >= window) return;
      if (this.inflight.has(ev.seq)) continue;
      if (this.tooLarge(this.s.topics.event(ev.type), Buffer.byteLength(ev.json), 1, 'event')) {
        this.refuseEvent(ev);
        continue;
      }
      const timer = setTimeout(() => this.onPublishTimeout(c), this.s.publishTimeoutMs);
      this.inflight.set(ev.seq, { client: c, timer });
      this.maxInflightSeen = Math.max(this.maxInflightSeen, this.inflight.size);
      c.publish(this.s.topics.event(ev.type), ev.json, { qos: 1 }, (err) => {
        const f = this.inflight.get(ev.seq);
        if (f?.client === c) {
          clearTimeout(f.timer);
          this.inflight.delete(ev.seq);
        }
        if (err) return; // connection going down: the event stays in the outbox and is resent
        this.counts.events_published++;
        this.outbox.ack(ev.seq);
        this.pump();
      });
    }
  }

  /**
   * An event the broker cannot take (over its maximum packet size): it leaves the outbox (it would
   * block every later event) and a small event says which one, how big and the limit; the event
   * itself stays in the event log under state_dir (turnwise events). An alarm's refusal is an
   * alarm.
   */
  private refuseEvent(ev: {
    seq: number;
    id: string;
    type: string;
    severity: 'info' | 'warning' | 'alarm';
    json: string;
  }): void {
    this.outbox.ack(ev.seq);
    const bytes = Buffer.byteLength(ev.json);
    const max = this.conn.limits.maximumPacketSize;
    void this.queueEvent({
      id: `mqtt-refused-${ev.id}`.slice(0, 128),
      ts: new Date(this.now()).toISOString(),
      asset: this.asset,
      type: 'mqtt_payload_refused',
      severity: ev.severity === 'alarm' ? 'alarm' : 'warning',
      message:
        `event ${ev.id} (${ev.type}, ${bytes} bytes) is over the broker's maximum ` +
        `packet size (${max} bytes) and was not published; it is kept in the ` +
        `agent's event log (turnwise events). Raise the broker's max_packet_size`,
      refused_id: ev.id,
      refused_type: ev.type,
      payload_bytes: bytes,
      max_packet_bytes: max,
    });
  }

  private onPublishTimeout(c: MqttClient): void {
    if (c !== this.client) return;
    this.counts.publish_timeouts++;
    this.conn.fail(
      c,
      Object.assign(
        new Error(
          `an event was not acknowledged within ` +
            `${this.s.publishTimeoutMs / 1000} s (mqtt.publish_timeout_s)`,
        ),
        { code: 'PUBLISH_TIMEOUT' },
      ),
    );
  }

  private onMessage(c: MqttClient, topic: string, payload: Buffer, packet?: IPublishPacket): void {
    if (c !== this.client || topic !== this.s.topics.cmd || !this.commands) return;
    // MQTT 5 request/response: the reply goes to the sender's response topic with its correlation
    // data.
    const rt = packet?.properties?.responseTopic;
    const responseTopic =
      typeof rt === 'string' && rt.length > 0 && rt.length <= 512 && !/[+#]/.test(rt) ? rt : null;
    const correlationData = packet?.properties?.correlationData;
    void this.commands.handle(payload).then((reply) => {
      // Replies are not durable: a sender that loses the connection asks again (same id, same
      // reply).
      if (c !== this.client || !this.connected) return;
      const to = responseTopic ?? this.s.topics.cmdReply;
      const body = JSON.stringify(reply);
      if (this.tooLarge(to, Buffer.byteLength(body), 1, 'command reply')) return;
      const properties =
        this.protoVersion === 5 && correlationData ? { correlationData } : undefined;
      c.publish(to, body, { qos: 1, properties }, () => {});
    });
  }

  private heartbeat(): void {
    const c = this.client;
    if (!this.connected || !c) return;
    const t = this.now();
    const { connected: _c, ...link } = this.health();
    const hb: HeartbeatPayload = {
      schema: SCHEMA_IDS.heartbeat,
      asset: this.asset,
      ts: new Date(t).toISOString(),
      uptime_s: Math.round((t - this.startedAt) / 100) / 10,
      connected_s: Math.round((t - this.conn.connectedAt) / 100) / 10,
      outbox: this.outbox.health(),
      mqtt: link,
      agent: this.extraHealth(),
    };
    const body = JSON.stringify(hb);
    if (this.tooLarge(this.s.topics.heartbeat, Buffer.byteLength(body), 0, 'heartbeat')) return;
    // A heartbeat three periods old says nothing about now.
    const properties =
      this.protoVersion === 5
        ? { messageExpiryInterval: Math.max(1, Math.ceil((3 * this.s.heartbeatMs) / 1000)) }
        : undefined;
    c.publish(this.s.topics.heartbeat, body, { qos: 0, properties }, () => {});
  }
}

import {
  closeSync,
  fsyncSync,
  mkdirSync,
  openSync,
  readFileSync,
  renameSync,
  writeSync,
} from 'node:fs';
import { dirname } from 'node:path';
import { connect as mqttConnect, type MqttClient } from 'mqtt';
import { BrokerConnection, type ConnectFn } from '../broker-connection.js';
import type { AgentEvent } from '../../events.js';
import { waitUntilEmpty, type AddOutcome, type Outbox } from '../../outbox/outbox.js';
import type { Logger } from '../../log.js';
import { BurstLog } from '../../burst-log.js';
import type { MqttSettings } from '../settings.js';
import {
  EVENT_METRIC,
  propertiesOf,
  sameValue,
  valueFields,
  type MetricDef,
  type MetricValue,
} from './metrics.js';
import { DataType, SparkplugCodec, type MetricMsg, type PayloadMsg } from './proto.js';

/**
 * A Sparkplug B 3.0 edge node with one device (the fan), on its own MQTT connection because the
 * NDEATH must be that connection's will. Session rules, each from the specification (Eclipse
 * Sparkplug 3.0.0, chapters 4 "Topics and Messages", 5 "Operational Behavior", 6 "Payloads"):
 *
 * - CONNECT with clean session, the will is the NDEATH: QoS 1, retain false, payload holding only
 *   the bdSeq metric and no seq (tck-id-payloads-ndeath-will-message-qos / -retain, -ndeath-seq).
 * - bdSeq goes up by one on every new CONNECT, 0-255 then 0 again, and is kept across restarts
 *   under state_dir so a host never sees an old bdSeq come back after a reboot.
 * - After CONNACK: subscribe NCMD, DCMD and (with a primary host) spBv1.0/STATE/<host>; with a
 *   primary host configured, publish the births only once its STATE says online
 *   (tck-id-message-flow-edge-node-birth-publish-subscribe), and end the session (NDEATH, then
 *   DISCONNECT) when it says offline; the agent keeps measuring and driving the advisory meanwhile.
 * - NBIRTH (seq 0, bdSeq, 'Node Control/Rebirth' = false without alias), then DBIRTH with every
 *   device metric (name, alias, datatype, current value or is_null, engineering unit as property);
 *   all births and data at QoS 0, retain false; seq one more on every message, 255 then 0.
 * - DDATA carries only the metrics that changed, by alias only, without datatype.
 * - Events from this node's own durable outbox as the metric 'Event', one per DDATA, with the
 *   event's time; is_historical when the event waited through an outage (or a restart).
 * - NCMD 'Node Control/Rebirth' = true: stop data, publish NBIRTH + DBIRTH again with the same
 *   bdSeq. Any other NCMD or DCMD metric is refused in the log (once per burst) and changes
 *   nothing.
 * - Intentional stop: DDEATH, NDEATH, then DISCONNECT
 *   (tck-id-operational-behavior-edge-node-intentional-disconnect-*).
 *
 * Delivery of events: Sparkplug requires QoS 0 for DDATA, so an event counts as sent once mqtt.js
 * has written it to the socket; the JSON event topic (QoS 1, deleted on PUBACK) stays the
 * at-least-once path when both are on.
 *
 * The connection itself (attempts, protocol level, broker limits, backoff, liveness, orderly stop)
 * is a BrokerConnection (../broker-connection.ts), as the JSON publisher's is; this class keeps the
 * births, data, deaths, bdSeq, aliases, rebirth and the primary host's STATE.
 */

export interface SparkplugIds {
  readonly groupId: string;
  readonly edgeNodeId: string;
  readonly deviceId: string;
  readonly primaryHostId?: string;
  readonly clientId: string;
}

/** Where the next bdSeq is kept. */
export interface BdSeqStore {
  /** The bdSeq for the CONNECT about to be sent; remembers the one after it. */
  next(): number;
}

/**
 * bdSeq in a small JSON file (write to a temporary name, fsync, rename). A file that cannot be read
 * starts at 0; one that cannot be written is said once and the count goes on in memory.
 */
export class FileBdSeqStore implements BdSeqStore {
  private value: number;
  private warned = false;

  constructor(
    private readonly file: string,
    private readonly log: Logger,
  ) {
    this.value = 0;
    try {
      const v = (JSON.parse(readFileSync(file, 'utf8')) as { next_bdseq?: unknown }).next_bdseq;
      if (typeof v === 'number' && Number.isInteger(v) && v >= 0 && v <= 255) this.value = v;
      else
        log.warn(
          { file },
          `${file}: next_bdseq is not a whole number 0-255; starting the Sparkplug bdSeq at 0`,
        );
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      if (code !== 'ENOENT')
        log.warn(
          { file, error: String(e) },
          `cannot read ${file} (${code ?? 'bad JSON'}); starting the Sparkplug bdSeq at 0`,
        );
    }
  }

  next(): number {
    const v = this.value;
    this.value = (v + 1) % 256;
    try {
      mkdirSync(dirname(this.file), { recursive: true });
      const tmp = `${this.file}.tmp`;
      const fd = openSync(tmp, 'w', 0o644);
      try {
        writeSync(fd, JSON.stringify({ next_bdseq: this.value }) + '\n');
        fsyncSync(fd);
      } finally {
        closeSync(fd);
      }
      renameSync(tmp, this.file);
      this.warned = false;
    } catch (e) {
      if (!this.warned)
        this.log.warn(
          { file: this.file, error: String(e) },
          `cannot save the Sparkplug bdSeq to ${this.file}; it goes on in memory ` +
            `(after a restart a host may see a bdSeq again): check state_dir`,
        );
      this.warned = true;
    }
    return v;
  }
}

export class MemoryBdSeqStore implements BdSeqStore {
  constructor(private value = 0) {}
  next(): number {
    const v = this.value;
    this.value = (v + 1) % 256;
    return v;
  }
}

export interface SparkplugNodeOptions {
  readonly mqtt: MqttSettings;
  readonly ids: SparkplugIds;
  readonly metrics: readonly MetricDef[];
  /** This node's own durable outbox of events. */
  readonly outbox: Outbox;
  readonly bdSeq: BdSeqStore;
  readonly log: Logger;
  readonly agentVersion?: string;
  readonly connect?: ConnectFn;
  readonly now?: () => number;
  readonly random?: () => number;
  /**
   * Connected this long without an online STATE from the primary host: said once per burst, ms
   * (default 10 s).
   */
  readonly hostWaitReportMs?: number;
}

export interface SparkplugHealth {
  readonly connected: boolean;
  readonly born: boolean;
  readonly primary_host_online: boolean | null;
  readonly bdseq: number;
  readonly connects_total: number;
  readonly births_total: number;
  readonly rebirths_total: number;
  readonly messages_total: number;
  readonly events_sent_total: number;
  readonly commands_refused_total: number;
  readonly protocol_version: 4 | 5;
  readonly refused_too_large_total: number;
  readonly stuck_replaced_total: number;
}

export const NAMESPACE = 'spBv1.0';
const REBIRTH = 'Node Control/Rebirth';
/** Event DDATA and value DDATA wait while this many bytes sit unsent in the socket. */
const BACKLOG_BYTES = 64 * 1024;

export function sparkplugTopics(ids: SparkplugIds) {
  const n = `${NAMESPACE}/${ids.groupId}`;
  return {
    nbirth: `${n}/NBIRTH/${ids.edgeNodeId}`,
    ndeath: `${n}/NDEATH/${ids.edgeNodeId}`,
    ndata: `${n}/NDATA/${ids.edgeNodeId}`,
    ncmd: `${n}/NCMD/${ids.edgeNodeId}`,
    dbirth: `${n}/DBIRTH/${ids.edgeNodeId}/${ids.deviceId}`,
    ddeath: `${n}/DDEATH/${ids.edgeNodeId}/${ids.deviceId}`,
    ddata: `${n}/DDATA/${ids.edgeNodeId}/${ids.deviceId}`,
    dcmd: `${n}/DCMD/${ids.edgeNodeId}/+`,
    state: ids.primaryHostId ? `${NAMESPACE}/STATE/${ids.primaryHostId}` : null,
  };
}

export class SparkplugNode {
  readonly topics: ReturnType<typeof sparkplugTopics>;
  private readonly codec = new SparkplugCodec();
  private readonly s: MqttSettings;
  private readonly ids: SparkplugIds;
  private readonly defs: readonly MetricDef[];
  private readonly byAlias = new Map<number, MetricDef>();
  private readonly eventAlias: number;
  private readonly outbox: Outbox;
  private readonly store: BdSeqStore;
  private readonly log: Logger;
  private readonly burst: BurstLog;
  private readonly now: () => number;
  private readonly version: string;
  private readonly hostWaitReportMs: number;
  private readonly conn: BrokerConnection;

  private born = false;
  private bdSeq = 0;
  private seq = 0;
  private hostOnline: boolean | null = null;
  private hostTs = -Infinity;
  private started = false;
  private sending = false;
  private hostTimer: NodeJS.Timeout | null = null;
  private unsubscribeOutbox: (() => void) | null = null;
  /** Current values (kept while offline, so a birth always carries the latest). */
  private readonly values = new Map<string, MetricValue>();
  /** Values last reported in this session (report by exception). */
  private readonly reported = new Map<string, MetricValue>();
  /**
   * Ids of events queued while born in this session: sent as live; every other event is historical.
   */
  private readonly liveIds = new Set<string>();
  private readonly counts = {
    births: 0,
    rebirths: 0,
    messages: 0,
    events: 0,
    refused: 0,
  };

  constructor(o: SparkplugNodeOptions) {
    this.s = o.mqtt;
    this.ids = o.ids;
    this.defs = o.metrics;
    for (const d of o.metrics) this.byAlias.set(d.alias, d);
    const ev = o.metrics.find((d) => d.name === EVENT_METRIC);
    if (!ev) throw new Error(`the device metrics need an "${EVENT_METRIC}" metric`);
    this.eventAlias = ev.alias;
    this.outbox = o.outbox;
    this.store = o.bdSeq;
    this.log = o.log;
    this.now = o.now ?? Date.now;
    this.version = o.agentVersion ?? '0.0.0';
    this.hostWaitReportMs = o.hostWaitReportMs ?? 10_000;
    this.burst = new BurstLog(o.log, { nowMs: this.now, quietMs: Infinity });
    this.topics = sparkplugTopics(o.ids);
    const s = this.s;
    this.conn = new BrokerConnection({
      settings: s,
      clientId: o.ids.clientId,
      log: o.log,
      connect: o.connect ?? mqttConnect,
      now: this.now,
      random: o.random ?? Math.random,
      session: {
        beginAttempt: () => {
          this.bdSeq = this.store.next();
        },
        will: () => ({
          topic: this.topics.ndeath,
          payload: this.deathPayload(),
          qos: 1,
          retain: false,
        }),
        connected: (c) => this.onConnect(c),
        dropped: () => this.onDropped(),
        message: (c, topic, payload) => this.onMessage(c, topic, payload),
      },
      words: {
        connected: () => ({
          message: `Sparkplug session connected to ${s.url} (bdSeq ${this.bdSeq})`,
          fields: { client_id: o.ids.clientId, bdseq: this.bdSeq },
        }),
        reconnected: (failures) =>
          `Sparkplug session connected to ${s.url} after ` +
          `${failures} failed attempt(s) (bdSeq ${this.bdSeq})`,
        retrying: (wasConnected, reason) =>
          `${
            wasConnected
              ? `lost the Sparkplug session to ${s.url}: ${reason}`
              : `cannot open the Sparkplug session to ${s.url}: ${reason}`
          }; retrying with backoff (${s.reconnectMinMs / 1000} s up to ${s.reconnectMaxMs / 1000} s), each CONNECT with the next bdSeq`,
        fallback: () =>
          `the broker at ${s.url} does not take MQTT 5; the Sparkplug ` +
          `session uses MQTT 3.1.1 (the next CONNECT carries the next bdSeq)`,
      },
    });
  }

  private get client(): MqttClient | null {
    return this.conn.client;
  }

  private get connected(): boolean {
    return this.conn.connected;
  }

  start(): void {
    if (this.started) throw new Error('Sparkplug node already started');
    this.started = true;
    this.unsubscribeOutbox = this.outbox.onChange(() => this.pump());
    this.conn.start();
  }

  /**
   * New current values (from a window); publishes a DDATA with those that changed when the session
   * is born.
   */
  update(values: ReadonlyMap<string, MetricValue>): void {
    for (const [k, v] of values) if (k !== EVENT_METRIC) this.values.set(k, v);
    if (!this.born || !this.client) return;
    const t = this.now();
    const metrics: MetricMsg[] = [];
    for (const d of this.defs) {
      if (d.name === EVENT_METRIC || !this.values.has(d.name)) continue;
      const v = this.values.get(d.name) ?? null;
      if (this.reported.has(d.name) && sameValue(this.reported.get(d.name), v)) continue;
      metrics.push({ alias: d.alias, timestamp: t, ...valueFields(d.datatype, v) });
      this.reported.set(d.name, v);
    }
    if (metrics.length > 0) this.send(this.topics.ddata, { timestamp: t, metrics });
  }

  /**
   * Queues an event in this node's durable outbox; it goes out as the 'Event' metric. Never waits
   * on the network.
   */
  queueEvent(e: AgentEvent): Promise<AddOutcome> {
    if (this.born) this.liveIds.add(e.id);
    return this.outbox.add(e);
  }

  health(): SparkplugHealth {
    return {
      connected: this.connected,
      born: this.born,
      primary_host_online: this.ids.primaryHostId ? this.hostOnline : null,
      bdseq: this.bdSeq,
      connects_total: this.conn.counts.connects,
      births_total: this.counts.births,
      rebirths_total: this.counts.rebirths,
      messages_total: this.counts.messages,
      events_sent_total: this.counts.events,
      commands_refused_total: this.counts.refused,
      protocol_version: this.conn.protocolVersion,
      refused_too_large_total: this.conn.counts.refusedTooLarge,
      stuck_replaced_total: this.conn.counts.stuckReplaced,
    };
  }

  isBorn(): boolean {
    return this.born;
  }

  /** Waits until the outbox is empty (true) or `timeoutMs` has passed (false). */
  drain(timeoutMs: number): Promise<boolean> {
    return waitUntilEmpty(this.outbox, this.now, timeoutMs);
  }

  /**
   * DDEATH and NDEATH when born, then DISCONNECT (so the broker does not publish the will), and no
   * more reconnects.
   */
  async stop(): Promise<void> {
    if (this.conn.stopping) return;
    if (this.hostTimer) clearTimeout(this.hostTimer);
    this.unsubscribeOutbox?.();
    await this.conn.stop(
      (c) => {
        if (this.born) this.send(this.topics.ddeath, { timestamp: this.now(), metrics: [] });
        this.born = false;
        return new Promise<void>((resolve) =>
          c.publish(this.topics.ndeath, this.deathPayload(), { qos: 1, retain: false }, () =>
            resolve(),
          ),
        );
      },
      { alwaysDisconnect: true },
    );
  }

  // --- session -------------------------------------------------------------------------------

  private deathPayload(): Buffer {
    // No seq in an NDEATH (tck-id-payloads-ndeath-seq); only the bdSeq metric
    // (tck-id-topics-ndeath-payload).
    return this.codec.encode({
      timestamp: this.now(),
      metrics: [
        { name: 'bdSeq', timestamp: this.now(), datatype: DataType.Int64, long_value: this.bdSeq },
      ],
    });
  }

  private onConnect(c: MqttClient): void {
    this.born = false;
    this.hostOnline = null;
    this.hostTs = -Infinity;
    const filters = [
      this.topics.ncmd,
      this.topics.dcmd,
      ...(this.topics.state ? [this.topics.state] : []),
    ];
    c.subscribe(filters, { qos: 1 }, (err, granted) => {
      if (c !== this.client) return;
      if (err || granted?.some((g) => g.qos === 128)) {
        this.burst.report(
          'subscribe',
          `the broker refused a Sparkplug subscription (${filters.join(', ')}); rebirth ` +
            `requests${this.topics.state ? ' and the primary host STATE' : ''} will not ` +
            `arrive (check the broker ACL)`,
        );
      }
      if (!this.topics.state) this.birth(false);
      else if (this.hostOnline !== true) this.waitForHost(c);
    });
  }

  private waitForHost(c: MqttClient): void {
    if (this.hostTimer) clearTimeout(this.hostTimer);
    this.hostTimer = setTimeout(() => {
      this.hostTimer = null;
      if (c !== this.client || this.born) return;
      this.burst.report(
        'primary-host',
        `Sparkplug: no online STATE from primary host "${this.ids.primaryHostId}" ` +
          `on ${this.topics.state} after ` +
          `${(this.hostWaitReportMs / 1000).toFixed(0)} s; the node stays quiet (no ` +
          `births, no data) until it comes online. The agent keeps measuring, keeps ` +
          `driving the advisory and keeps the JSON topics and the event outbox going`,
        { host: this.ids.primaryHostId },
        this.hostOnline === false ? 'offline' : 'silent',
      );
    }, this.hostWaitReportMs);
    this.hostTimer.unref();
  }

  /**
   * The client is gone: no session, nothing being sent, every waiting event historical from now on.
   */
  private onDropped(): void {
    this.born = false;
    this.sending = false;
    this.liveIds.clear();
    if (this.hostTimer) clearTimeout(this.hostTimer);
  }

  /** NBIRTH then DBIRTH: every metric with its current value; seq starts again at 0. */
  private birth(rebirth: boolean): void {
    const c = this.client;
    if (!c || !this.connected) return;
    if (this.hostTimer) clearTimeout(this.hostTimer);
    this.born = false; // no data between here and the end of the birth sequence
    this.seq = 0;
    const t = this.now();
    this.send(this.topics.nbirth, {
      timestamp: t,
      metrics: [
        { name: 'bdSeq', timestamp: t, datatype: DataType.Int64, long_value: this.bdSeq },
        // No alias for the rebirth metric
        // (tck-id-operational-behavior-data-commands-rebirth-name-aliases).
        { name: REBIRTH, timestamp: t, datatype: DataType.Boolean, boolean_value: false },
        {
          name: 'Properties/Software',
          timestamp: t,
          datatype: DataType.String,
          string_value: `turnwise ${this.version}`,
        },
      ],
    });
    this.reported.clear();
    const metrics: MetricMsg[] = this.defs.map((d) => {
      const v = d.name === EVENT_METRIC ? null : (this.values.get(d.name) ?? null);
      if (d.name !== EVENT_METRIC) this.reported.set(d.name, v);
      return {
        name: d.name,
        alias: d.alias,
        timestamp: t,
        datatype: d.datatype,
        properties: propertiesOf(d),
        ...valueFields(d.datatype, v),
      };
    });
    this.send(this.topics.dbirth, { timestamp: t, metrics });
    this.born = true;
    this.counts.births++;
    if (rebirth) this.counts.rebirths++;
    this.burst.resolved(
      'primary-host',
      `Sparkplug: primary host "${this.ids.primaryHostId}" ` +
        `is online; births published (bdSeq ${this.bdSeq})`,
    );
    this.pump();
  }

  /**
   * Publishes one Sparkplug message at QoS 0, retain false, with the next seq. A message over the
   * broker's maximum packet size is not sent (the broker would drop the session) and does not use
   * a seq; it is said once per burst. Returns whether it was sent.
   */
  private send(topic: string, p: Omit<PayloadMsg, 'seq'>, cb?: (err?: Error) => void): boolean {
    const c = this.client;
    if (!c) return false;
    const seq = this.seq;
    const bytes = this.codec.encode({ ...p, seq });
    const refused = this.conn.tooLarge(topic, bytes.length, 0, 0, (size, max) => ({
      message:
        `Sparkplug: a message to ${topic} would be ${size} bytes, over the broker's ` +
        `maximum packet size of ${max} bytes; not sent (raise the broker's ` +
        `max_packet_size${topic.includes('BIRTH') ? '; without its births the node cannot come online' : ''})`,
      kind: topic.split('/')[2],
    }));
    if (refused) return false;
    this.seq = (this.seq + 1) % 256;
    this.counts.messages++;
    c.publish(topic, bytes, { qos: 0, retain: false }, (err) => cb?.(err ?? undefined));
    return true;
  }

  /** Sends the oldest waiting event, one at a time. */
  private pump(): void {
    const c = this.client;
    if (!this.born || !c || this.sending) return;
    const backlog = (c.stream as { writableLength?: number } | undefined)?.writableLength ?? 0;
    if (backlog > BACKLOG_BYTES) {
      setTimeout(() => this.pump(), 200).unref();
      return;
    }
    const ev = this.outbox.sendable().next();
    if (ev.done) return;
    const e = ev.value;
    let ts = this.now();
    try {
      const parsed = Date.parse((JSON.parse(e.json) as { ts?: string }).ts ?? '');
      if (Number.isFinite(parsed)) ts = parsed;
    } catch {
      // the outbox only holds JSON it wrote itself; a bad one is still sent with the send time
    }
    const historical = !this.liveIds.has(e.id);
    this.sending = true;
    const metric: MetricMsg = {
      alias: this.eventAlias,
      timestamp: ts,
      string_value: e.json,
      ...(historical ? { is_historical: true } : {}),
    };
    const sent = this.send(
      this.topics.ddata,
      { timestamp: this.now(), metrics: [metric] },
      (err) => {
        if (c !== this.client) return;
        this.sending = false;
        if (err) return; // connection going down: the event stays in the outbox
        this.outbox.ack(e.seq);
        this.liveIds.delete(e.id);
        this.counts.events++;
        this.pump();
      },
    );
    if (!sent) {
      // Too large for the broker: it would block every later event. It stays in the event log under
      // state_dir (turnwise events).
      this.sending = false;
      this.outbox.ack(e.seq);
      this.liveIds.delete(e.id);
      this.log.warn(
        { event_id: e.id, type: e.type },
        `Sparkplug: event ${e.id} (${e.type}) is too large for the broker and was ` +
          `not sent as a metric; it is kept in the agent's event log (turnwise events)`,
      );
      setTimeout(() => this.pump(), 0).unref();
    }
  }

  // --- incoming ------------------------------------------------------------------------------

  private onMessage(c: MqttClient, topic: string, payload: Buffer): void {
    if (c !== this.client) return;
    try {
      if (topic === this.topics.state) this.onState(c, payload);
      else if (topic === this.topics.ncmd) this.onCommand(payload, 'NCMD');
      else if (topic.startsWith(this.topics.dcmd.slice(0, -1)))
        this.onCommand(payload, 'DCMD', topic.slice(this.topics.dcmd.length - 1));
    } catch (e) {
      // nothing a sender writes may take the agent down
      this.refuse(
        `could not handle a message on ${topic}: ${(e as Error)?.message ?? String(e)}`,
        'internal',
      );
    }
  }

  private refuse(message: string, kind: string): void {
    this.counts.refused++;
    this.burst.report('command', `Sparkplug: ${message}`, {}, kind);
  }

  /**
   * spBv1.0/STATE/<host>: JSON {"online": bool, "timestamp": ms} (Sparkplug 3.0, STATE birth/death
   * payload).
   */
  private onState(c: MqttClient, payload: Buffer): void {
    let online: boolean | null = null;
    let ts = NaN;
    const text = payload.toString('utf8').trim();
    try {
      const j = JSON.parse(text) as { online?: unknown; timestamp?: unknown };
      if (typeof j.online === 'boolean') online = j.online;
      if (typeof j.timestamp === 'number') ts = j.timestamp;
    } catch {
      // fall through: not JSON
    }
    if (online === null) {
      this.burst.report(
        'state-payload',
        `Sparkplug: STATE message on ${this.topics.state} is not {"online": ` +
          `true|false, "timestamp": <ms>} (got ${JSON.stringify(text.slice(0, 80))}); ` +
          `ignored. Check that the primary host speaks Sparkplug 3.0`,
        {},
        'bad',
      );
      return;
    }
    // An older STATE (lower timestamp) than one already seen is stale: a retained copy racing a new
    // one.
    if (Number.isFinite(ts)) {
      if (ts < this.hostTs) return;
      this.hostTs = ts;
    }
    this.hostOnline = online;
    if (online) {
      if (!this.born) this.birth(false);
      return;
    }
    if (this.born) {
      this.burst.report(
        'primary-host',
        `Sparkplug: primary host "${this.ids.primaryHostId}" went offline; ending ` +
          `this Sparkplug session (NDEATH) and going quiet until it is back online. ` +
          `The agent keeps measuring, driving the advisory and queueing events`,
        { host: this.ids.primaryHostId },
        'offline',
      );
      this.born = false;
      // Ends the session as the specification asks
      // (tck-id-operational-behavior-edge-node-termination-host-offline); onClose reconnects with
      // backoff and waits for an online STATE.
      c.publish(this.topics.ndeath, this.deathPayload(), { qos: 1, retain: false }, () =>
        c.end(false),
      );
    } else {
      this.waitForHost(c);
    }
  }

  private onCommand(payload: Buffer, verb: 'NCMD' | 'DCMD', device?: string): void {
    let p: PayloadMsg;
    try {
      p = this.codec.decode(payload);
    } catch (e) {
      this.refuse(
        `${verb} is not a Sparkplug B payload (${(e as Error).message}); ignored`,
        `${verb}-malformed`,
      );
      return;
    }
    const metrics = p.metrics ?? [];
    if (metrics.length === 0) {
      this.refuse(`${verb} without metrics; ignored`, `${verb}-empty`);
      return;
    }
    for (const m of metrics) {
      const name =
        m.name ?? (m.alias !== undefined ? this.byAlias.get(Number(m.alias))?.name : undefined);
      if (verb === 'NCMD' && name === REBIRTH) {
        if (m.boolean_value !== true) {
          this.refuse(
            `${verb} '${REBIRTH}' needs the boolean value true ` +
              `(tck-id-operational-behavior-data-commands-ncmd-rebirth-value); ignored`,
            'rebirth-value',
          );
          continue;
        }
        if (!this.connected) continue;
        if (this.topics.state && this.hostOnline !== true) {
          this.refuse(
            `rebirth requested while primary host "${this.ids.primaryHostId}" ` +
              `is not online; the births follow once its STATE says online`,
            'rebirth-waiting',
          );
          continue;
        }
        this.log.info(
          { bdseq: this.bdSeq },
          'Sparkplug: rebirth requested (NCMD); publishing ' +
            'NBIRTH and DBIRTH again with the same bdSeq',
        );
        this.birth(true);
        continue;
      }
      const shown = name ?? (m.alias !== undefined ? `alias ${m.alias}` : '(no name, no alias)');
      const where = verb === 'DCMD' ? ` for device "${device}"` : '';
      this.refuse(
        `${verb}${where} writes metric ${JSON.stringify(shown)}, which this ` +
          `node does not accept: the only writable metric is NCMD '${REBIRTH}' ` +
          `(measurements and verdicts are read-only; acknowledge the advisory and ` +
          `start baselines through the JSON command topic). Nothing was changed`,
        `${verb}-unknown`,
      );
    }
  }
}

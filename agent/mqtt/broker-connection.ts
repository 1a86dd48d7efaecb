import type { IClientOptions, IConnackPacket, IPublishPacket, MqttClient } from 'mqtt';
import { reconnectDelayMs } from './backoff.js';
import {
  brokerLimits,
  forceEnd,
  ProtocolChoice,
  publishPacketBytes,
  stuckReason,
  type BrokerLimits,
} from './link-habits.js';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import { settleMqttPacketCaches } from './packet-cache.js';
import { clientOptions } from './client-options.js';
import type { MqttSettings } from './settings.js';

/**
 * One MQTT connection to the plant broker, as both of the agent's sessions (the JSON publisher and
 * the Sparkplug B edge node) keep it; each owns one and adds only its own messages:
 * - a fresh client per connection attempt (mqtt.js's own reconnect is switched off, options from
 *   client-options.ts), with the owner's last-will for that attempt;
 * - MQTT 5 first, 3.1.1 for an hour after a broker refused the protocol level (`ProtocolChoice`),
 *   retried after at most 0.5 s and said once;
 * - the broker's limits from its CONNACK (Receive Maximum, Maximum Packet Size) and the refusal of
 *   a message over the packet size, counted and said once per burst;
 * - reconnect with exponential backoff and equal jitter (backoff.ts), also after a refused CONNACK,
 *   saying what is wrong once per burst and "connected ... after N failed attempt(s)" when it
 *   recovers; a connection that lasted 10 s resets the backoff;
 * - a liveness check every second that replaces a client stuck neither connecting nor closing;
 * - an orderly stop: the owner's farewell, then DISCONNECT (so the broker keeps the will), each
 *   bounded by a timeout.
 * Everything comes in through the constructor (connect function, clock, random, logger, settings);
 * nothing here is shared between instances.
 */

export type ConnectFn = (url: string, opts: IClientOptions) => MqttClient;

/** A connection that lasted this long resets the reconnect backoff. */
const STABLE_MS = 10_000;
/** Each step of an orderly stop (farewell, DISCONNECT) waits at most this long. */
const STOP_WAIT_MS = 2000;

/** What the owner of a connection does at each step of its life. */
export interface ConnectionSession {
  /**
   * A connection attempt begins (before the protocol level is chosen): start what is per attempt.
   */
  beginAttempt(): void;
  /** The last-will of the attempt about to be made. */
  will(): NonNullable<IClientOptions['will']>;
  /** The CONNACK came and `limits` holds what it said; `before` is what the previous one said. */
  limitsKnown?(before: BrokerLimits): void;
  /** The client is connected (the "connected" line is already written). */
  connected(c: MqttClient): void;
  /** The client is forgotten (closed, replaced or stopped): nothing of it may be used any more. */
  dropped(c: MqttClient): void;
  /** A message from the current client. */
  message(c: MqttClient, topic: string, payload: Buffer, packet?: IPublishPacket): void;
}

/** The owner's words for the lines the connection writes. */
export interface ConnectionWords {
  /** Connected, no burst of failures open: the info line and its fields. */
  connected(): { message: string; fields: Record<string, unknown> };
  /** Connected after `failures` failed attempts: the line that ends the "connect" burst. */
  reconnected(failures: number): string;
  /**
   * Lost (`wasConnected`) or could not connect, because of `reason`; a retry follows with backoff.
   */
  retrying(wasConnected: boolean, reason: string): string;
  /** The broker does not take MQTT 5 (`reason`); 3.1.1 from now on, for an hour. */
  fallback(reason: string): string;
}

/** Running totals of one connection. */
export interface ConnectionCounts {
  /** Connection attempts made (calls of the connect function). */
  attempts: number;
  /** CONNACKs received. */
  connects: number;
  /** Attempts that ended without a connection (a protocol-level fallback is not counted). */
  connectFailures: number;
  /** Clients replaced by the liveness check. */
  stuckReplaced: number;
  /** Messages not sent because they would pass the broker's Maximum Packet Size. */
  refusedTooLarge: number;
}

export interface BrokerConnectionOptions {
  readonly settings: MqttSettings;
  readonly clientId: string;
  readonly log: Logger;
  readonly session: ConnectionSession;
  readonly words: ConnectionWords;
  readonly connect: ConnectFn;
  readonly now: () => number;
  readonly random: () => number;
}

/**
 * Why a connection attempt failed or a connection ended, in words with what to do, and a kind for
 * "once per burst".
 */
export function describeConnectError(err: unknown): { kind: string; reason: string } {
  const e = err as (Error & { code?: string | number }) | null;
  if (!e) return { kind: 'closed', reason: 'the connection was closed' };
  const code = e.code;
  if (code === 'PUBLISH_TIMEOUT') return { kind: 'publish-timeout', reason: e.message };
  if (code === 'STUCK') return { kind: 'stuck', reason: `${e.message}; the client was replaced` };
  if (code === 4 || code === 134)
    return {
      kind: 'bad-credentials',
      reason: 'the broker refused the user name or password; check mqtt.username and mqtt.password',
    };
  if (code === 5 || code === 135) {
    // mosquitto answers a wrong password with "not authorised" too.
    return {
      kind: 'not-authorised',
      reason:
        'the broker refused the login (not authorised): wrong ' +
        'user name or password, or this client is not allowed; ' +
        "check mqtt.username, mqtt.password and the broker's users",
    };
  }
  if (code === 2 || code === 133)
    return { kind: 'client-id', reason: 'the broker rejected the client id; set mqtt.client_id' };
  if (typeof code === 'number')
    return {
      kind: `refused-${code}`,
      reason: `the broker refused the connection (code ${code}: ${e.message})`,
    };
  if (code === 'ECONNREFUSED')
    return {
      kind: code,
      reason:
        'nothing accepts connections there (connection ' +
        'refused); is the broker running and the port right?',
    };
  if (code === 'ENOTFOUND' || code === 'EAI_AGAIN')
    return {
      kind: code,
      reason: `cannot resolve the host name (${code}); check the name and the board's DNS`,
    };
  if (code === 'EHOSTUNREACH' || code === 'ENETUNREACH' || code === 'ETIMEDOUT')
    return { kind: code, reason: `the broker cannot be reached (${code}); check the network` };
  if (
    typeof code === 'string' &&
    (code.startsWith('ERR_TLS') ||
      code.startsWith('ERR_SSL') ||
      code.includes('CERT') ||
      code.includes('SIGNATURE'))
  ) {
    return {
      kind: `tls-${code}`,
      reason:
        `TLS failed (${code}: ${e.message}); check mqtt.tls.ca_file, the name in ` +
        `the broker certificate (mqtt.tls.servername) and the client certificate`,
    };
  }
  if (/connack timeout/i.test(e.message))
    return { kind: 'timeout', reason: 'no answer from the broker within mqtt.connect_timeout_s' };
  return { kind: String(code ?? e.message), reason: e.message };
}

export class BrokerConnection {
  private readonly s: MqttSettings;
  private readonly clientId: string;
  private readonly log: Logger;
  private readonly session: ConnectionSession;
  private readonly words: ConnectionWords;
  private readonly connectFn: ConnectFn;
  private readonly now: () => number;
  private readonly random: () => number;
  private readonly burst: BurstLog;
  private readonly protocol: ProtocolChoice;

  private current: MqttClient | null = null;
  private isConnected = false;
  private connectedAtMs = 0;
  private protoVersion: 4 | 5 = 5;
  private brokerSaid: BrokerLimits = { receiveMaximum: null, maximumPacketSize: null };
  private lastError: unknown = null;
  private failures = 0;
  private attemptAt = 0;
  private gotConnack = false;
  private lostSince: number | null = null;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private livenessTimer: NodeJS.Timeout | null = null;
  private started = false;
  private stopped = false;
  private lastDelayMs: number | null = null;
  private readonly tally: ConnectionCounts = {
    attempts: 0,
    connects: 0,
    connectFailures: 0,
    stuckReplaced: 0,
    refusedTooLarge: 0,
  };

  constructor(o: BrokerConnectionOptions) {
    this.s = o.settings;
    this.clientId = o.clientId;
    this.log = o.log;
    this.session = o.session;
    this.words = o.words;
    this.connectFn = o.connect;
    this.now = o.now;
    this.random = o.random;
    this.burst = new BurstLog(o.log, { nowMs: this.now, quietMs: Infinity });
    this.protocol = new ProtocolChoice(this.now);
  }

  /** The client of this attempt or connection; null between attempts and after stop. */
  get client(): MqttClient | null {
    return this.current;
  }

  /** True from the CONNACK until the client is dropped. */
  get connected(): boolean {
    return this.isConnected;
  }

  /** When the current (or last) connection was made, by the injected clock. */
  get connectedAt(): number {
    return this.connectedAtMs;
  }

  /** The protocol level of the current attempt or connection: 5, or 4 (3.1.1) after a refusal. */
  get protocolVersion(): 4 | 5 {
    return this.protoVersion;
  }

  /** What the last CONNACK said (nothing with 3.1.1). */
  get limits(): BrokerLimits {
    return this.brokerSaid;
  }

  /** True once stop() was called: no attempt is made after that. */
  get stopping(): boolean {
    return this.stopped;
  }

  /** The wait before the next attempt as last drawn, ms (null before the first failure). */
  get lastReconnectDelayMs(): number | null {
    return this.lastDelayMs;
  }

  /** Running totals since construction. */
  get counts(): Readonly<ConnectionCounts> {
    return this.tally;
  }

  /**
   * Starts connecting in the background, with the liveness check. Returns at once; the broker may
   * be down.
   */
  start(): void {
    if (this.started) throw new Error('broker connection already started');
    this.started = true;
    // Before the first packet: mqtt-packet's process-wide caches must not grow over months
    // (packet-cache.ts).
    settleMqttPacketCaches();
    this.livenessTimer = setInterval(() => this.checkLiveness(), 1000);
    this.livenessTimer.unref();
    this.connectNow();
  }

  /**
   * True (counted, and said once per burst under "too-large" with the owner's words) when a PUBLISH
   * of `payloadBytes` to `topic` would pass the broker's Maximum Packet Size.
   */
  tooLarge(
    topic: string,
    payloadBytes: number,
    qos: number,
    propertyBytes: number,
    say: (size: number, max: number) => { message: string; kind: string },
  ): boolean {
    const max = this.brokerSaid.maximumPacketSize;
    if (max === null) return false;
    const size = publishPacketBytes(topic, payloadBytes, qos, this.protoVersion, propertyBytes);
    if (size <= max) return false;
    this.tally.refusedTooLarge++;
    const { message, kind } = say(size, max);
    this.burst.report('too-large', message, { topic, bytes: size, max_bytes: max }, kind);
    return true;
  }

  /**
   * Ends client `c` as failed with `err` and reconnects with backoff; false (and nothing done) when
   * `c` is not the current client.
   */
  fail(c: MqttClient, err: unknown): boolean {
    if (c !== this.current) return false;
    this.lastError = err;
    this.onClose(c);
    return true;
  }

  /**
   * Stops for good: no more attempts or liveness checks. When connected, `farewell` (the owner's
   * last messages) is awaited up to 2 s; then the client is dropped and a clean DISCONNECT (so the
   * broker does not publish the will) is awaited up to 2 s, when connected, or also when not with
   * `alwaysDisconnect` (the Sparkplug node's habit); last, the client is ended at once.
   */
  async stop(
    farewell: (c: MqttClient) => Promise<void>,
    o: { readonly alwaysDisconnect?: boolean } = {},
  ): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    if (this.livenessTimer) clearInterval(this.livenessTimer);
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.livenessTimer = this.reconnectTimer = null;
    const c = this.current;
    if (!c) return;
    const wasConnected = this.isConnected;
    if (wasConnected) await withTimeout(farewell(c), STOP_WAIT_MS);
    this.drop(c);
    if (wasConnected || o.alwaysDisconnect)
      await withTimeout(new Promise<void>((r) => c.end(false, {}, () => r())), STOP_WAIT_MS);
    c.end(true);
  }

  private connectNow(): void {
    this.reconnectTimer = null;
    if (this.stopped) return;
    this.lastError = null;
    this.session.beginAttempt();
    this.protoVersion = this.protocol.version;
    this.attemptAt = this.now();
    this.gotConnack = false;
    this.lostSince = null;
    const opts = clientOptions(this.s, this.clientId, this.protoVersion, this.session.will());
    this.tally.attempts++;
    let c: MqttClient;
    try {
      c = this.connectFn(this.s.url, opts);
    } catch (e) {
      this.lastError = e;
      this.scheduleReconnect(false);
      return;
    }
    this.current = c;
    c.on('error', (e) => {
      if (c === this.current) this.lastError = e;
    });
    c.on('connect', (connack) => this.onConnect(c, connack));
    c.on('close', () => this.onClose(c));
    c.on('message', (topic, payload, packet) => {
      if (c === this.current) this.session.message(c, topic, payload, packet);
    });
  }

  private onConnect(c: MqttClient, connack?: IConnackPacket): void {
    if (c !== this.current) return;
    this.gotConnack = true;
    const before = this.brokerSaid;
    this.brokerSaid = brokerLimits(connack);
    this.session.limitsKnown?.(before);
    this.isConnected = true;
    this.connectedAtMs = this.now();
    this.tally.connects++;
    if (
      !this.burst.resolved('connect', this.words.reconnected(this.failures), {
        client_id: this.clientId,
      })
    ) {
      const { message, fields } = this.words.connected();
      this.log.info(fields, message);
    }
    this.session.connected(c);
  }

  private onClose(c: MqttClient): void {
    if (c !== this.current) return;
    const wasConnected = this.isConnected;
    this.drop(c);
    forceEnd(c);
    if (this.stopped) return;
    if (
      !wasConnected &&
      this.protocol.attemptFailed(this.protoVersion, this.lastError, this.gotConnack)
    ) {
      this.log.info(
        { url: this.s.url },
        this.words.fallback(describeConnectError(this.lastError).reason),
      );
      this.reconnectTimer = setTimeout(
        () => this.connectNow(),
        Math.min(this.s.reconnectMinMs, 500),
      );
      return;
    }
    if (wasConnected && this.now() - this.connectedAtMs >= STABLE_MS) this.failures = 0;
    this.scheduleReconnect(wasConnected);
  }

  /** Forgets client `c`: not connected; the owner drops what it kept for it. */
  private drop(c: MqttClient): void {
    if (c !== this.current) return;
    this.current = null;
    this.isConnected = false;
    this.session.dropped(c);
  }

  private scheduleReconnect(wasConnected: boolean): void {
    const { kind, reason } = describeConnectError(this.lastError);
    if (!wasConnected) this.tally.connectFailures++;
    const delay = reconnectDelayMs(
      this.failures,
      this.s.reconnectMinMs,
      this.s.reconnectMaxMs,
      this.random,
    );
    this.failures++;
    this.lastDelayMs = delay;
    this.burst.report(
      'connect',
      this.words.retrying(wasConnected, reason),
      { client_id: this.clientId },
      kind,
    );
    this.reconnectTimer = setTimeout(() => this.connectNow(), delay);
  }

  private checkLiveness(): void {
    const c = this.current;
    if (!c || this.stopped) return;
    if (this.isConnected && !c.connected) this.lostSince ??= this.now();
    else this.lostSince = null;
    const why = stuckReason(
      c,
      {
        connected: this.isConnected,
        attemptAtMs: this.attemptAt,
        connectTimeoutMs: this.s.connectTimeoutMs,
        keepaliveS: this.s.keepaliveS,
        lostSinceMs: this.lostSince,
      },
      this.now(),
    );
    if (!why) return;
    this.tally.stuckReplaced++;
    this.fail(c, Object.assign(new Error(why), { code: 'STUCK' }));
  }
}

/** Resolves when `p` does or after `ms`, whichever comes first. */
function withTimeout(p: Promise<void>, ms: number): Promise<void> {
  return new Promise((resolve) => {
    const t = setTimeout(resolve, ms);
    void p.then(() => {
      clearTimeout(t);
      resolve();
    });
  });
}

import type { IConnackPacket, MqttClient } from 'mqtt';

/**
 * What the agent's two MQTT sessions (JSON topics, Sparkplug) share about plant brokers' habits:
 * the protocol level to ask for, the limits the broker gave in its CONNACK, and the liveness rule
 * for a client that is stuck.
 */

/**
 * MQTT 5 first; 3.1.1 for an hour after a broker said it does not speak 5, then 5 again (a cluster
 * may get upgraded).
 */
export class ProtocolChoice {
  private fallbackUntil = -Infinity;
  constructor(private readonly now: () => number) {}

  get version(): 4 | 5 {
    return this.now() < this.fallbackUntil ? 4 : 5;
  }

  /**
   * A connection attempt with `version` failed with `err`; true when that says "not MQTT 5"
   * (CONNACK 0x01 "unacceptable protocol version" from a 3.1.1 broker, 0x84 "unsupported protocol
   * version" from a 5 one).
   */
  attemptFailed(version: 4 | 5, err: unknown, gotConnack: boolean): boolean {
    if (version !== 5) return false;
    const code = (err as { code?: unknown } | null)?.code;
    if (!gotConnack && (code === 1 || code === 132)) {
      this.fallbackUntil = this.now() + 3_600_000;
      return true;
    }
    return false;
  }
}

/** The broker's limits from its CONNACK (MQTT 5 properties; none with 3.1.1). */
export interface BrokerLimits {
  /** Receive Maximum: QoS 1/2 publishes the broker takes unacknowledged at once. */
  readonly receiveMaximum: number | null;
  /** Maximum Packet Size the broker accepts, bytes. */
  readonly maximumPacketSize: number | null;
}

export function brokerLimits(connack: IConnackPacket | undefined): BrokerLimits {
  const p = connack?.properties;
  return {
    receiveMaximum: p?.receiveMaximum ?? null,
    maximumPacketSize: p?.maximumPacketSize ?? null,
  };
}

/**
 * Size of a PUBLISH packet on the wire, bytes, for the limit check: fixed header (1 + up to 4
 * bytes of remaining length), topic (2 + UTF-8 bytes), packet id (QoS > 0), the MQTT 5 properties
 * (`propertyBytes`, plus their own length field) and the payload. MQTT 5.0 section 3.3.
 */
export function publishPacketBytes(
  topic: string,
  payloadBytes: number,
  qos: number,
  version: 4 | 5,
  propertyBytes = 0,
): number {
  const variable =
    2 +
    Buffer.byteLength(topic) +
    (qos > 0 ? 2 : 0) +
    (version === 5 ? varintBytes(propertyBytes) + propertyBytes : 0);
  const remaining = variable + payloadBytes;
  return 1 + varintBytes(remaining) + remaining;
}

function varintBytes(n: number): number {
  return n < 128 ? 1 : n < 16_384 ? 2 : n < 2_097_152 ? 3 : 4;
}

/**
 * Liveness of one client: stuck when an attempt has neither connected nor closed well after its
 * connect timeout, or when the agent counts it connected but mqtt.js no longer does and no close
 * came (the "disconnecting" state mqtt.js can be left in after some socket errors). Returns why, or
 * null.
 */
export function stuckReason(
  c: MqttClient,
  s: {
    connected: boolean;
    attemptAtMs: number;
    connectTimeoutMs: number;
    keepaliveS: number;
    lostSinceMs: number | null;
  },
  nowMs: number,
): string | null {
  if (!s.connected) {
    const limit = s.connectTimeoutMs + 5000;
    return nowMs - s.attemptAtMs > limit
      ? `a connection attempt neither connected nor failed within ${(limit / 1000).toFixed(0)} s`
      : null;
  }
  if (s.lostSinceMs !== null && nowMs - s.lostSinceMs > Math.max(5000, s.keepaliveS * 1500)) {
    return (
      `the client stopped being connected ${((nowMs - s.lostSinceMs) / 1000).toFixed(0)} ` +
      `s ago${c.disconnecting ? ' and is stuck disconnecting' : ''} without closing`
    );
  }
  return null;
}

/**
 * Ends a client at once, whatever state it is in (a stuck client may not even have a socket;
 * mqtt.js then throws).
 */
export function forceEnd(c: MqttClient): void {
  try {
    c.end(true);
  } catch {
    try {
      c.stream?.destroy();
    } catch {
      // nothing more to end
    }
  }
}

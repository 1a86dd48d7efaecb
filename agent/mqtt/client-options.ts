import type { IClientOptions } from 'mqtt';
import type { MqttSettings } from './settings.js';

/**
 * The mqtt.js options every connection of the agent uses (the JSON publisher and the Sparkplug B
 * node): a clean session that ends with the connection (MQTT 5: Clean Start and Session Expiry
 * Interval 0, as clean session does in 3.1.1), no reconnect of mqtt.js's own (the caller backs off
 * with jitter), no QoS 0 queue while offline, no resubscription, no 65536-entry number cache
 * (6.5 MB of heap for a few messages a second; packet-cache.ts), credentials and verified TLS.
 */
export function clientOptions(
  s: MqttSettings,
  clientId: string,
  protocolVersion: 4 | 5,
  will: NonNullable<IClientOptions['will']>,
): IClientOptions {
  const tls = s.tls;
  return {
    clientId,
    protocolVersion,
    clean: true,
    ...(protocolVersion === 5 ? { properties: { sessionExpiryInterval: 0 } } : {}),
    reconnectPeriod: 0,
    connectTimeout: s.connectTimeoutMs,
    keepalive: s.keepaliveS,
    queueQoSZero: false,
    resubscribe: false,
    writeCache: false,
    will,
    username: s.username,
    password: s.password?.reveal(),
    ca: tls?.ca,
    cert: tls?.cert,
    key: tls?.key?.reveal(),
    servername: tls?.servername,
    rejectUnauthorized: true,
  };
}

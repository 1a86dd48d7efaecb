import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { MqttConfig } from '../config/mqtt.js';
import { UserError } from '../errors.js';
import { readSecretFile, resolveSecret, Secret } from './secrets.js';
import { topicsFor, type Topics } from './topics.js';

/**
 * Everything the publisher needs, with files read and secrets resolved. Secrets print as
 * "[redacted]".
 */
export interface MqttSettings {
  readonly url: string;
  readonly clientId: string;
  readonly topics: Topics;
  readonly username?: string;
  readonly password?: Secret;
  readonly tls?: {
    readonly ca?: Buffer;
    readonly cert?: Buffer;
    readonly key?: Secret;
    readonly servername?: string;
  };
  readonly keepaliveS: number;
  readonly connectTimeoutMs: number;
  readonly publishTimeoutMs: number;
  readonly inflightWindow: number;
  readonly reconnectMinMs: number;
  readonly reconnectMaxMs: number;
  readonly heartbeatMs: number;
  /** 0 = live messages off. */
  readonly liveIntervalMs: number;
  /** Command token; absent = the agent does not listen for commands. */
  readonly commandToken?: Secret;
}

export interface OutboxSettings {
  readonly dir: string;
  readonly maxEvents: number;
  readonly maxBytes: number;
}

function readPublicFile(file: string, where: string): Buffer {
  try {
    return readFileSync(file);
  } catch (e) {
    throw new UserError(
      where,
      `cannot read ${file} (${(e as NodeJS.ErrnoException).code})`,
      'check the path; relative paths are taken from the directory the agent starts in',
    );
  }
}

/**
 * Turns the validated `mqtt` config section into publisher settings: reads the CA and certificate,
 * reads secrets from their file (refusing one open to group/others) or environment variable.
 * Throws UserError naming the key and the file.
 */
export function resolveMqttSettings(
  cfg: MqttConfig,
  asset: string,
  env: NodeJS.ProcessEnv = process.env,
): MqttSettings {
  const tls = cfg.tls
    ? {
        ca: cfg.tls.ca_file ? readPublicFile(cfg.tls.ca_file, 'mqtt.tls.ca_file') : undefined,
        cert: cfg.tls.cert_file
          ? readPublicFile(cfg.tls.cert_file, 'mqtt.tls.cert_file')
          : undefined,
        key: cfg.tls.key_file
          ? new Secret(readSecretFile(cfg.tls.key_file, 'mqtt.tls.key_file'))
          : undefined,
        servername: cfg.tls.servername,
      }
    : undefined;
  return {
    url: cfg.url,
    clientId: cfg.client_id ?? `turnwise-${asset}`,
    topics: topicsFor(cfg.topic_prefix, asset),
    username: cfg.username,
    password: cfg.password ? resolveSecret(cfg.password, 'mqtt.password', env) : undefined,
    tls,
    keepaliveS: cfg.keepalive_s,
    connectTimeoutMs: cfg.connect_timeout_s * 1000,
    publishTimeoutMs: cfg.publish_timeout_s * 1000,
    inflightWindow: cfg.inflight_window,
    reconnectMinMs: cfg.reconnect_min_s * 1000,
    reconnectMaxMs: cfg.reconnect_max_s * 1000,
    heartbeatMs: cfg.heartbeat_s * 1000,
    liveIntervalMs: cfg.live_interval_s * 1000,
    commandToken: cfg.commands
      ? resolveSecret(cfg.commands.token, 'mqtt.commands.token', env)
      : undefined,
  };
}

export function outboxSettings(cfg: MqttConfig, stateDir: string): OutboxSettings {
  return {
    dir: join(stateDir, 'outbox'),
    maxEvents: cfg.outbox_max_events,
    maxBytes: Math.round(cfg.outbox_max_mb * 1024 * 1024),
  };
}

import { connect as mqttConnect, type MqttClient } from 'mqtt';
import { describe, expect, it } from 'vitest';
import { mqttSchema } from '../agent/config/mqtt.js';
import type { AgentEvent } from '../agent/events.js';
import { reconnectDelayMs } from '../agent/mqtt/backoff.js';
import { publishPacketBytes } from '../agent/mqtt/link-habits.js';
import { openPlantLink, type PlantLink } from '../agent/mqtt/plant-link.js';
import { aedesBroker } from './support/aedes.js';
import { CaptureLog } from './support/capture-log.js';
import { testResources, uniquePrefix, until } from './support/harness.js';
import { Mosquitto } from './support/mosquitto.js';
import { TestSubscriber } from './support/subscriber.js';
import { HoldingProxy } from './support/tcp-proxy.js';

/**
 * MQTT habits of plant brokers and of mqtt.js, against real brokers on loopback: mosquitto with
 * small limits (max_packet_size, max_inflight_messages, which mosquitto 2 announces to MQTT 5
 * clients as Maximum Packet Size and Receive Maximum), an in-process 3.1.1-only broker (aedes)
 * for the fallback, a client stuck without connecting, and a broker restart under 50 agents.
 */

const res = testResources('tw-habits-');
const ASSET = 'kessrow-id3a'; // invented demo fan

function cfg(url: string, prefix: string, extra: Record<string, unknown> = {}) {
  return mqttSchema.parse({
    url,
    topic_prefix: prefix,
    reconnect_min_s: 0.2,
    reconnect_max_s: 1,
    connect_timeout_s: 2,
    ...extra,
  });
}
async function link(o: Parameters<typeof openPlantLink>[0]): Promise<PlantLink> {
  const l = await openPlantLink(o);
  res.defer(() => l.close());
  return l;
}
async function mosquitto(extraConfig: string[] = []): Promise<Mosquitto> {
  const m = await Mosquitto.start({ extraConfig });
  res.defer(() => m.dispose());
  return m;
}
function event(i: number, extra: Record<string, unknown> = {}): AgentEvent {
  return {
    id: `hab-${String(i).padStart(3, '0')}`,
    ts: new Date().toISOString(),
    asset: ASSET,
    type: 'test_step',
    severity: 'warning',
    step: i,
    ...extra,
  };
}
function v5client(url: string, filters: string[]): Promise<MqttClient> {
  return new Promise((resolve, reject) => {
    const c = mqttConnect(url, {
      protocolVersion: 5,
      reconnectPeriod: 0,
      clientId: `tw-hab-${Math.random().toString(16).slice(2)}`,
    });
    c.on('error', reject);
    c.once('connect', () => c.subscribe(filters, { qos: 1 }, (e) => (e ? reject(e) : resolve(c))));
    res.defer(() => new Promise<void>((r) => c.end(true, {}, () => r())));
  });
}

describe('MQTT 5 and the broker limits (mosquitto with small limits)', () => {
  it("keeps at most the broker's receive maximum unacknowledged, even with a larger inflight_window", async () => {
    const m = await mosquitto(['max_inflight_messages 2']);
    const proxy = await HoldingProxy.start(m.port);
    res.defer(() => proxy.close());
    const l = await link({
      mqtt: cfg(`mqtt://127.0.0.1:${proxy.port}`, uniquePrefix(), {
        inflight_window: 8,
        publish_timeout_s: 30,
      }),
      asset: ASSET,
      stateDir: res.tmpDir(),
      log: new CaptureLog(),
    });
    await until(() => l.publisher.isConnected(), 10_000, 'connection');
    expect(l.publisher.linkInfo()).toMatchObject({
      protocol_version: 5,
      receive_maximum: 2,
      inflight_window: 2,
    });
    proxy.holdReplies = true; // no PUBACK comes back: publishes pile up to the window
    for (let i = 0; i < 10; i++) await l.queueEvent(event(i));
    await until(() => l.publisher.linkInfo().inflight_max_seen >= 2, 5000, 'two in flight');
    await new Promise((r) => setTimeout(r, 500));
    // reached the broker's receive maximum, never more
    expect(l.publisher.linkInfo().inflight_max_seen).toBe(2);
    expect(l.outbox.size).toBe(10);
  }, 30_000);

  it('refuses an over-size event with an event naming it, keeps the others flowing, and never loses the connection over it', async () => {
    const m = await mosquitto(['max_packet_size 4096']);
    const prefix = uniquePrefix();
    const sub = await TestSubscriber.open(m.url, [`${prefix}/#`]);
    res.defer(() => sub.close());
    const log = new CaptureLog();
    const l = await link({ mqtt: cfg(m.url, prefix), asset: ASSET, stateDir: res.tmpDir(), log });
    await until(() => l.publisher.isConnected(), 10_000, 'connection');
    expect(l.publisher.linkInfo()).toMatchObject({
      protocol_version: 5,
      maximum_packet_size: 4096,
    });
    for (let i = 0; i < 10; i++) void l.queueEvent(event(i));
    void l.queueEvent(event(10, { blob: 'x'.repeat(6000) })); // about 6.1 KB: over 4096
    for (let i = 11; i < 20; i++) void l.queueEvent(event(i));
    const base = `${prefix}/${ASSET}/event`;
    await sub.waitFor(
      (ms) =>
        ms.filter((x) => x.topic === `${base}/test_step`).length >= 19 &&
        ms.some((x) => x.topic === `${base}/mqtt_payload_refused`),
      20_000,
      '19 events and the refusal',
    );
    const ids = sub.messages
      .filter((x) => x.topic === `${base}/test_step`)
      .map((x) => (x.json as { id: string }).id);
    expect(new Set(ids).size).toBe(19);
    expect(ids).not.toContain('hab-010');
    const refusal = sub.messages.find((x) => x.topic === `${base}/mqtt_payload_refused`)!
      .json as Record<string, unknown>;
    expect(refusal).toMatchObject({
      refused_id: 'hab-010',
      refused_type: 'test_step',
      max_packet_bytes: 4096,
      severity: 'warning',
    });
    expect(refusal.payload_bytes as number).toBeGreaterThan(6000);
    expect(String(refusal.message)).toMatch(/event log \(turnwise events\)/);
    expect(l.publisher.linkInfo().refused_too_large_total).toBe(1);
    expect(l.publisher.health().connects_total).toBe(1); // the broker never had to drop the session
    expect(
      log.matching(/over the broker's maximum packet size of 4096 bytes/, 'warn'),
    ).toHaveLength(1);
    await until(() => l.outbox.size === 0, 5000, 'outbox empty');
  }, 60_000);

  it("live and heartbeat messages carry a message expiry; a command's reply goes to its response topic with its correlation data", async () => {
    const m = await mosquitto();
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    const watcher = await v5client(m.url, [`${base}/live`, `${base}/heartbeat`, 'plant/replies/#']);
    const got: Array<{ topic: string; payload: Buffer; props: Record<string, unknown> }> = [];
    watcher.on('message', (topic, payload, packet) =>
      got.push({ topic, payload, props: (packet.properties ?? {}) as Record<string, unknown> }),
    );
    const l = await link({
      mqtt: cfg(m.url, prefix, {
        heartbeat_s: 1,
        live_interval_s: 0.5,
        commands: { token: { env: 'TW_TEST_TOKEN' } },
      }),
      asset: ASSET,
      stateDir: res.tmpDir(),
      log: new CaptureLog(),
      env: { TW_TEST_TOKEN: 'invented-token-for-tests' },
      handlers: { takeSnapshot: () => ({ snapshot: 'taken' }) },
    });
    await until(() => l.publisher.isConnected(), 10_000, 'connection');
    const live = {
      schema: 'turnwise.live.v1' as const,
      asset: ASSET,
      ts: new Date().toISOString(),
      speed_rpm: 1484.6,
      channels: [],
    };
    await until(() => l.publishLive(() => live), 5000, 'a live message sent');
    const cmd = JSON.stringify({
      id: 'req-1',
      token: 'invented-token-for-tests',
      cmd: 'snapshot.take',
      args: {},
    });
    watcher.publish(`${base}/cmd`, cmd, {
      qos: 1,
      properties: { responseTopic: 'plant/replies/hmi-7', correlationData: Buffer.from('corr-42') },
    });
    await until(
      () =>
        got.some((g) => g.topic === 'plant/replies/hmi-7') &&
        got.some((g) => g.topic === `${base}/heartbeat`) &&
        got.some((g) => g.topic === `${base}/live`),
      10_000,
      'reply, heartbeat and live',
    );
    const reply = got.find((g) => g.topic === 'plant/replies/hmi-7')!;
    expect(JSON.parse(reply.payload.toString()).id).toBe('req-1');
    expect(Buffer.from(reply.props.correlationData as Buffer).toString()).toBe('corr-42');
    // Expiry: two live intervals (1 s), three heartbeat periods (3 s).
    expect(got.find((g) => g.topic === `${base}/live`)!.props.messageExpiryInterval).toBe(1);
    expect(got.find((g) => g.topic === `${base}/heartbeat`)!.props.messageExpiryInterval).toBe(3);
  }, 30_000);

  it('falls back to MQTT 3.1.1 with a broker that does not speak 5 (aedes), and says so once', async () => {
    const aedes = await aedesBroker();
    res.defer(() => aedes.close());
    const url = aedes.url;
    const prefix = uniquePrefix();
    const sub = await TestSubscriber.open(url, [`${prefix}/#`]);
    res.defer(() => sub.close());
    const log = new CaptureLog();
    const l = await link({ mqtt: cfg(url, prefix), asset: ASSET, stateDir: res.tmpDir(), log });
    await until(() => l.publisher.isConnected(), 10_000, 'connection over 3.1.1');
    expect(l.publisher.linkInfo().protocol_version).toBe(4);
    void l.queueEvent(event(1));
    await sub.waitFor(
      (ms) => ms.some((x) => x.topic === `${prefix}/${ASSET}/event/test_step`),
      10_000,
      'the event over 3.1.1',
    );
    expect(log.matching(/does not take MQTT 5/)).toHaveLength(1);
  }, 30_000);
});

describe('liveness and reconnect spread', () => {
  it('replaces a client that is stuck without connecting', async () => {
    const m = await mosquitto();
    const log = new CaptureLog();
    let calls = 0;
    const l = await link({
      mqtt: cfg(m.url, uniquePrefix(), { connect_timeout_s: 1 }),
      asset: ASSET,
      stateDir: res.tmpDir(),
      log,
      // The first client never starts connecting and never closes: what a client left stuck looks
      // like from outside.
      connect: (url, opts) => mqttConnect(url, { ...opts, manualConnect: calls++ === 0 }),
    });
    await until(
      () => l.publisher.isConnected(),
      15_000,
      'connection after the stuck client was replaced',
    );
    expect(calls).toBe(2);
    expect(l.publisher.linkInfo().stuck_replaced_total).toBe(1);
    expect(
      log.matching(/neither connected nor failed within 6 s; the client was replaced/, 'warn'),
    ).toHaveLength(1);
  }, 30_000);

  it('backoff law: grows per failure, each wait between half the cap and the cap (own computation)', () => {
    const lo = (n: number) => reconnectDelayMs(n, 500, 8000, () => 0);
    const hi = (n: number) => reconnectDelayMs(n, 500, 8000, () => 0.999999);
    expect([0, 1, 2, 3, 4, 5].map(lo)).toEqual([250, 500, 1000, 2000, 4000, 4000]);
    expect([0, 1, 2, 3, 4, 5].map((n) => Math.round(hi(n)))).toEqual([
      500, 1000, 2000, 4000, 8000, 8000,
    ]);
    // MQTT 5.0 section 3.3: 1 byte type, remaining length 2 bytes here, topic 2+5, packet id 2,
    // properties 1+0, payload 200.
    expect(publishPacketBytes('a/b/c', 200, 1, 5, 0)).toBe(1 + 2 + (2 + 5 + 2 + 1 + 200));
    expect(publishPacketBytes('a/b/c', 100, 0, 4)).toBe(1 + 1 + (2 + 5 + 100));
  });

  it('50 agents on loopback: after a broker restart every one reconnects, spread over seconds, not in the same second', async () => {
    const m = await mosquitto();
    const N = 50;
    const connects: number[][] = Array.from({ length: N }, () => []);
    const links: PlantLink[] = [];
    for (let i = 0; i < N; i++) {
      links.push(
        await link({
          mqtt: cfg(m.url, uniquePrefix(), {
            client_id: `tw-fleet-${i}`,
            reconnect_min_s: 0.5,
            reconnect_max_s: 8,
            heartbeat_s: 60,
            live_interval_s: 0,
          }),
          asset: ASSET,
          stateDir: res.tmpDir(),
          log: new CaptureLog(),
          connect: (url, opts) => {
            const c = mqttConnect(url, opts);
            c.on('connect', () => connects[i].push(Date.now()));
            return c;
          },
        }),
      );
    }
    await until(() => links.every((l) => l.publisher.isConnected()), 20_000, 'all 50 connected');
    await m.stop();
    const down = Date.now();
    await until(
      () => links.every((l) => !l.publisher.isConnected()),
      10_000,
      'all 50 saw the broker go',
    );
    // the broker is down for about 3 s, as a restart under load takes
    await new Promise((r) => setTimeout(r, 3000));
    await m.restart();
    const up = Date.now();
    await until(() => links.every((l) => l.publisher.isConnected()), 30_000, 'all 50 reconnected');
    const again = connects.map((c) => c.find((t) => t > down)!);
    expect(again.every((t) => t !== undefined)).toBe(true);
    const rel = again.map((t) => t - up).sort((a, b) => a - b);
    const spread = rel.at(-1)! - rel[0];
    const perSecond = new Map<number, number>();
    for (const t of again)
      perSecond.set(Math.floor(t / 1000), (perSecond.get(Math.floor(t / 1000)) ?? 0) + 1);
    const busiest = Math.max(...perSecond.values());
    console.info(
      `50 agents after a ${((up - down) / 1000).toFixed(1)} s broker outage: ` +
        `reconnects from +${rel[0]} ms to +${rel.at(-1)} ms after the restart ` +
        `(spread ${spread} ms); busiest wall-clock second held ${busiest} of 50`,
    );
    expect(spread).toBeGreaterThan(1000);
    expect(busiest).toBeLessThan(N);
    expect(perSecond.size).toBeGreaterThanOrEqual(2);
  }, 120_000);
});

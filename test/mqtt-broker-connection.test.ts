import { createServer, type AddressInfo, type Socket } from 'node:net';
import { performance } from 'node:perf_hooks';
import { connect as mqttConnect, type IClientOptions, type MqttClient } from 'mqtt';
import { describe, expect, it } from 'vitest';
import { mqttSchema } from '../agent/config/mqtt.js';
import {
  BrokerConnection,
  type ConnectFn,
  type ConnectionSession,
} from '../agent/mqtt/broker-connection.js';
import { resolveMqttSettings, type MqttSettings } from '../agent/mqtt/settings.js';
import { aedesBroker } from './support/aedes.js';
import { CaptureLog } from './support/capture-log.js';
import { testResources, uniquePrefix, until } from './support/harness.js';
import { freePort, Mosquitto, plainBroker } from './support/mosquitto.js';
import { TestSubscriber } from './support/subscriber.js';

/**
 * The MQTT connection lifecycle both sessions share (agent/mqtt/broker-connection.ts), on its own,
 * against real sockets: a port nobody listens on, a TCP server that never answers, mosquitto, and
 * aedes (3.1.1 only). Only the clock and the random source are fakes, where a test needs them.
 */

const res = testResources('tw-conn-');
const ASSET = 'kessrow-id3a'; // invented demo fan

function settings(url: string, extra: Record<string, unknown> = {}): MqttSettings {
  return resolveMqttSettings(
    mqttSchema.parse({
      url,
      topic_prefix: uniquePrefix(),
      reconnect_min_s: 0.1,
      reconnect_max_s: 0.8,
      connect_timeout_s: 1,
      ...extra,
    }),
    ASSET,
  );
}

/** A session that records what the connection asked of it, with a will on `willTopic`. */
function recordingSession(willTopic = 'test/unused/will') {
  const trace: string[] = [];
  const session: ConnectionSession = {
    beginAttempt: () => trace.push('begin'),
    will: () => {
      trace.push('will');
      return { topic: willTopic, payload: Buffer.from('gone'), qos: 1, retain: false };
    },
    connected: () => trace.push('connected'),
    dropped: () => trace.push('dropped'),
    message: () => trace.push('message'),
  };
  return { trace, session };
}

const words = {
  connected: () => ({ message: 'test: connected', fields: { who: 'test' } }),
  reconnected: (n: number) => `test: connected after ${n} failed attempt(s)`,
  retrying: (was: boolean, reason: string) => `test: ${was ? 'lost' : 'cannot connect'}: ${reason}`,
  fallback: (reason: string) => `test: no MQTT 5 (${reason})`,
};

interface Attempt {
  readonly at: number;
  readonly opts: IClientOptions;
  readonly delayBefore: number | null;
}

function open(o: {
  s: MqttSettings;
  log: CaptureLog;
  session: ConnectionSession;
  connect?: ConnectFn;
  now?: () => number;
  random?: () => number;
}) {
  const attempts: Attempt[] = [];
  const inner = o.connect ?? mqttConnect;
  const conn: BrokerConnection = new BrokerConnection({
    settings: o.s,
    clientId: `tw-conn-${Math.random().toString(16).slice(2)}`,
    log: o.log,
    session: o.session,
    words,
    connect: (url, opts) => {
      attempts.push({ at: performance.now(), opts, delayBefore: conn.lastReconnectDelayMs });
      return inner(url, opts);
    },
    now: o.now ?? Date.now,
    random: o.random ?? Math.random,
  });
  res.defer(() => conn.stop(async () => {}));
  return { conn, attempts };
}

describe('BrokerConnection: reconnect backoff', () => {
  it('grows the wait per failure, each wait between half the cap and the cap as the injected random draws it, and says so once', async () => {
    const port = await freePort(); // nothing listens there: every attempt is refused by the kernel
    const draws = [0, 0.5, 0.999, 0.25, 0.75, 0];
    let i = 0;
    const log = new CaptureLog();
    const { conn, attempts } = open({
      s: settings(`mqtt://127.0.0.1:${port}`),
      log,
      session: recordingSession().session,
      random: () => draws[i++ % draws.length],
    });
    conn.start();
    await until(() => attempts.length >= 7, 15_000, 'seven attempts');
    const failed = conn.counts.connectFailures;
    const made = attempts.length;
    await conn.stop(async () => {});
    // min 100 ms, max 800 ms: caps 100, 200, 400, 800, 800, 800; wait = cap/2 + r * cap/2.
    const caps = [100, 200, 400, 800, 800, 800];
    const expected = caps.map((cap, n) => cap / 2 + draws[n] * (cap / 2));
    const planned = attempts.slice(1, 7).map((a) => a.delayBefore);
    expect(planned).toEqual(expected);
    planned.forEach((d, n) => {
      expect(d!).toBeGreaterThanOrEqual(caps[n] / 2);
      expect(d!).toBeLessThanOrEqual(caps[n]);
    });
    // The waits were really kept: each attempt came no sooner than its drawn wait after the one
    // before.
    for (let n = 1; n < 7; n++) {
      expect(attempts[n].at - attempts[n - 1].at).toBeGreaterThanOrEqual(expected[n - 1] - 2);
    }
    expect(failed).toBeGreaterThanOrEqual(made - 1); // the last attempt may not have failed yet
    expect(failed).toBeLessThanOrEqual(made);
    expect(conn.counts.connects).toBe(0);
    const said = log.matching(/^test: cannot connect: nothing accepts connections there/, 'warn');
    expect(said).toHaveLength(1); // once per burst, however many attempts
    expect(said[0].fields).toMatchObject({ problem: 'connect' });
  }, 30_000);

  it('ends the burst with "connected after N failed attempt(s)" when the broker comes up, and keeps the session hooks in order', async () => {
    const port = await freePort();
    const log = new CaptureLog();
    const { trace, session } = recordingSession();
    const { conn, attempts } = open({ s: settings(`mqtt://127.0.0.1:${port}`), log, session });
    conn.start();
    await until(() => attempts.length >= 3, 10_000, 'three refused attempts');
    const m = await Mosquitto.start({ port });
    res.defer(() => m.dispose());
    await until(() => conn.connected, 10_000, 'connection once the broker is up');
    const failed = conn.counts.connectFailures;
    expect(failed).toBeGreaterThanOrEqual(3);
    expect(
      log.matching(new RegExp(`^test: connected after ${failed} failed attempt\\(s\\)$`), 'info'),
    ).toHaveLength(1);
    expect(log.matching(/^test: connected$/)).toHaveLength(0); // the recovery line stands for it
    expect(conn.counts.connects).toBe(1);
    // Every attempt: begin, then its will; every refused client is dropped; the last one connected.
    const attemptsSeen = trace.filter((t) => t === 'begin').length;
    expect(attemptsSeen).toBe(attempts.length);
    expect(trace.slice(0, 2)).toEqual(['begin', 'will']);
    expect(trace.at(-1)).toBe('connected');
    expect(trace.filter((t) => t === 'dropped')).toHaveLength(attempts.length - 1);
  }, 30_000);
});

describe('BrokerConnection: clients that never connect', () => {
  it('replaces an attempt that gets no CONNACK within connect_timeout_s (a server that never answers)', async () => {
    const silent = createServer((sock: Socket) => {
      sock.on('error', () => {});
      res.defer(() => sock.destroy());
    });
    await new Promise<void>((r) => silent.listen(0, '127.0.0.1', () => r()));
    res.defer(() => new Promise<void>((r) => silent.close(() => r())));
    const silentUrl = `mqtt://127.0.0.1:${(silent.address() as AddressInfo).port}`;
    const b = await plainBroker();
    res.defer(() => b.dispose());
    const log = new CaptureLog();
    let calls = 0;
    const { conn, attempts } = open({
      s: settings(b.url, { connect_timeout_s: 1 }),
      log,
      session: recordingSession().session,
      connect: (url, opts) => mqttConnect(calls++ === 0 ? silentUrl : url, opts),
    });
    conn.start();
    await until(() => conn.connected, 10_000, 'connection after the silent attempt');
    expect(attempts).toHaveLength(2);
    // mqtt.js gave up on the first one after connect_timeout_s (1 s), not sooner.
    expect(attempts[1].at - attempts[0].at).toBeGreaterThanOrEqual(1000 - 2);
    expect(
      log.matching(
        /^test: cannot connect: no answer from the broker within mqtt.connect_timeout_s/,
        'warn',
      ),
    ).toHaveLength(1);
    // mqtt.js's own timeout ended it, not the liveness check
    expect(conn.counts.stuckReplaced).toBe(0);
  }, 30_000);

  it('the liveness check replaces a client that never even starts connecting, by the injected clock', async () => {
    const b = await plainBroker();
    res.defer(() => b.dispose());
    const log = new CaptureLog();
    let t = 1_700_000_000_000;
    let calls = 0;
    const { conn, attempts } = open({
      s: settings(b.url, { connect_timeout_s: 1 }),
      log,
      session: recordingSession().session,
      now: () => t,
      // The first client never starts connecting and never closes: what a stuck client looks like
      // from outside.
      connect: (url, opts) => mqttConnect(url, { ...opts, manualConnect: calls++ === 0 }),
    });
    conn.start();
    await new Promise((r) => setTimeout(r, 1500));
    expect(attempts).toHaveLength(1); // 1.5 s of real time, no time on the clock: not stuck yet
    expect(conn.counts.stuckReplaced).toBe(0);
    t += 6000; // exactly connect_timeout_s + 5 s: still not over the limit
    await new Promise((r) => setTimeout(r, 1200));
    expect(conn.counts.stuckReplaced).toBe(0);
    t += 1;
    await until(() => conn.connected, 5000, 'connection after the stuck client was replaced');
    expect(attempts).toHaveLength(2);
    expect(conn.counts.stuckReplaced).toBe(1);
    expect(
      log.matching(/neither connected nor failed within 6 s; the client was replaced/, 'warn'),
    ).toHaveLength(1);
  }, 30_000);
});

describe('BrokerConnection: protocol level', () => {
  it('falls back to 3.1.1 after a broker refuses MQTT 5 (aedes), says so once, and asks for 5 again an hour later', async () => {
    const aedes = await aedesBroker();
    res.defer(() => aedes.close());
    const url = aedes.url;
    const log = new CaptureLog();
    let t = 1_700_000_000_000;
    const { conn, attempts } = open({
      s: settings(url, { reconnect_min_s: 2, reconnect_max_s: 4 }),
      log,
      session: recordingSession().session,
      now: () => t,
    });
    conn.start();
    await until(() => conn.connected, 10_000, 'connection over 3.1.1');
    expect(attempts.map((a) => a.opts.protocolVersion)).toEqual([5, 4]);
    expect(conn.protocolVersion).toBe(4);
    expect(conn.limits).toEqual({ receiveMaximum: null, maximumPacketSize: null });
    // The retry after the refusal waits min(reconnect_min_s, 0.5 s), not the backoff (2 s here).
    const gap = attempts[1].at - attempts[0].at;
    expect(gap).toBeGreaterThanOrEqual(500 - 2);
    expect(gap).toBeLessThan(1500);
    const said = log.matching(/^test: no MQTT 5 /, 'info');
    expect(said).toHaveLength(1);
    expect(said[0].fields).toEqual({ url });
    expect(conn.counts.connectFailures).toBe(0); // a protocol refusal is not a failed attempt
    expect(log.matching(/^test: cannot connect/)).toHaveLength(0);

    // Within the hour a new connection stays on 3.1.1.
    t += 59 * 60_000;
    expect(conn.fail(conn.client!, new Error('test: dropped on purpose'))).toBe(true);
    await until(() => conn.connected, 10_000, 'reconnection within the hour');
    expect(attempts.map((a) => a.opts.protocolVersion)).toEqual([5, 4, 4]);

    // An hour after the refusal it asks for 5 again, is refused again, and falls back again.
    t += 2 * 60_000;
    expect(conn.fail(conn.client!, new Error('test: dropped on purpose'))).toBe(true);
    await until(() => attempts.length >= 5 && conn.connected, 15_000, 'the hourly try of MQTT 5');
    expect(attempts.map((a) => a.opts.protocolVersion)).toEqual([5, 4, 4, 5, 4]);
    expect(log.matching(/^test: no MQTT 5 /, 'info')).toHaveLength(2);
    // Each drop opened a burst of its own: the reconnection in between ended the first one.
    expect(log.matching(/^test: lost: test: dropped on purpose/, 'warn')).toHaveLength(2);
    expect(log.matching(/^test: connected after 1 failed attempt\(s\)$/, 'info')).toHaveLength(2);
  }, 30_000);
});

describe('BrokerConnection: broker limits and stop', () => {
  it("reads the broker's Maximum Packet Size from CONNACK and refuses a larger message, counted every time and said once", async () => {
    const m = await Mosquitto.start({
      extraConfig: ['max_packet_size 2048', 'max_inflight_messages 3'],
    });
    res.defer(() => m.dispose());
    const log = new CaptureLog();
    const { conn } = open({ s: settings(m.url), log, session: recordingSession().session });
    conn.start();
    await until(() => conn.connected, 10_000, 'connection');
    expect(conn.protocolVersion).toBe(5);
    expect(conn.limits).toEqual({ receiveMaximum: 3, maximumPacketSize: 2048 });
    const say = (size: number, max: number) => ({ message: `test: ${size} > ${max}`, kind: 'k' });
    // MQTT 5.0 section 3.3: 1 + 2 (remaining length) + topic 2+9 + packet id 2 + properties
    // 1+0 + payload.
    const overhead = 1 + 2 + (2 + 9 + 2 + 1);
    expect(conn.tooLarge('test/size', 2048 - overhead, 1, 0, say)).toBe(false);
    expect(conn.tooLarge('test/size', 2048 - overhead + 1, 1, 0, say)).toBe(true);
    expect(conn.tooLarge('test/size', 5000, 1, 0, say)).toBe(true);
    expect(conn.counts.refusedTooLarge).toBe(2);
    const said = log.matching(/^test: \d+ > 2048/, 'warn');
    expect(said).toHaveLength(1);
    expect(said[0].fields).toMatchObject({ topic: 'test/size', bytes: 2049, max_bytes: 2048 });
    expect(conn.counts.connects).toBe(1); // nothing was sent to make the broker drop us
  }, 30_000);

  it('an orderly stop sends the farewell and DISCONNECTs, so the broker keeps the will; a dead socket makes it publish the will', async () => {
    const b = await plainBroker();
    res.defer(() => b.dispose());
    const prefix = uniquePrefix();
    const sub = await TestSubscriber.open(b.url, [`${prefix}/#`]);
    res.defer(() => sub.close());

    const stopped = recordingSession(`${prefix}/stopped/will`);
    const a = open({ s: settings(b.url), log: new CaptureLog(), session: stopped.session });
    a.conn.start();
    await until(() => a.conn.connected, 10_000, 'first connection');
    await a.conn.stop(
      (c: MqttClient) =>
        new Promise<void>((r) => c.publish(`${prefix}/bye`, 'bye', { qos: 1 }, () => r())),
    );
    expect(a.conn.client).toBeNull();
    expect(a.conn.connected).toBe(false);
    expect(stopped.trace.at(-1)).toBe('dropped');

    const killed = recordingSession(`${prefix}/killed/will`);
    const k = open({ s: settings(b.url), log: new CaptureLog(), session: killed.session });
    k.conn.start();
    await until(() => k.conn.connected, 10_000, 'second connection');
    k.conn.client!.stream.destroy(); // no DISCONNECT: the broker publishes the will
    await sub.waitFor(
      (ms) => ms.some((x) => x.topic === `${prefix}/killed/will`),
      10_000,
      'the will of the killed connection',
    );
    await until(() => k.conn.connected && k.attempts.length === 2, 10_000, 'reconnection');
    await new Promise((r) => setTimeout(r, 300));
    expect(sub.on(`${prefix}/bye`)).toHaveLength(1);
    expect(sub.on(`${prefix}/stopped/will`)).toHaveLength(0);
    expect(a.attempts).toHaveLength(1); // no attempt after stop
  }, 30_000);

  it('stops at once when not connected and makes no further attempt', async () => {
    const port = await freePort();
    const { conn, attempts } = open({
      s: settings(`mqtt://127.0.0.1:${port}`, { reconnect_min_s: 0.2, reconnect_max_s: 0.2 }),
      log: new CaptureLog(),
      session: recordingSession().session,
    });
    conn.start();
    await until(() => attempts.length >= 2, 5000, 'two attempts');
    let farewells = 0;
    const t0 = performance.now();
    await conn.stop(async () => {
      farewells++;
    });
    expect(performance.now() - t0).toBeLessThan(500);
    const n = attempts.length;
    await new Promise((r) => setTimeout(r, 600));
    expect(attempts).toHaveLength(n);
    expect(farewells).toBe(0);
    expect(conn.stopping).toBe(true);
  }, 15_000);
});

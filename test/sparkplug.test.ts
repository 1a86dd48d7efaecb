import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mqttSchema } from '../agent/config/mqtt.js';
import type { AgentEvent } from '../agent/events.js';
import { resolveMqttSettings } from '../agent/mqtt/settings.js';
import { deviceMetrics, type MetricValue } from '../agent/mqtt/sparkplug/metrics.js';
import { FileBdSeqStore, SparkplugNode, type BdSeqStore } from '../agent/mqtt/sparkplug/node.js';
import { Outbox } from '../agent/outbox/outbox.js';
import { readEventLog } from '../agent/eventlog/event-log.js';
import { testConfig } from './support/config.js';
import { ManualClock } from '../agent/clock.js';
import { validateConfig } from '../agent/config/load.js';
import { Agent } from '../agent/runtime/agent.js';
import { FakeGpioLines } from '../drivers/gpio/fake-lines.js';
import { ArraySource } from './support/array-source.js';
import { synthesize } from './support/synth.js';
import { TestSubscriber } from './support/subscriber.js';
import { CaptureLog } from './support/capture-log.js';
import { testResources, until } from './support/harness.js';
import { Mosquitto } from './support/mosquitto.js';
import {
  HostRecorder,
  PythonSparkplug,
  type HostMessage,
  type HostMetric,
} from './support/sparkplug-host.js';

/**
 * The Sparkplug B edge node checked the way a host application sees it: a real mosquitto, a plain
 * subscriber, and every payload decoded by python3-protobuf from a .proto written in the tests
 * (test/support/sparkplug-host.ts), never by the agent's own protobufjs code. The rules checked are
 * the conformance statements of the Eclipse Sparkplug 3.0.0 specification; each check names its
 * statement (tck-id-...).
 */

const res = testResources('tw-spb-');
const ASSET = 'kessrow-id3a'; // invented demo fan
const cfg = testConfig([
  ['DE-V', 0, 'DE', 'vertical'],
  ['DE-H', 1, 'DE', 'horizontal'],
]);
const METRICS = deviceMetrics(cfg.sensors);
const GROUP = 'Kessrow Board Mill'; // invented plant; spaces are allowed in Sparkplug ids
const NODE = 'id3a-edge';

let py: PythonSparkplug;
beforeAll(() => {
  py = PythonSparkplug.build();
});
afterAll(() => py?.dispose());

function settings(url: string) {
  return resolveMqttSettings(
    mqttSchema.parse({
      url,
      topic_prefix: 'plant',
      reconnect_min_s: 0.2,
      reconnect_max_s: 1,
      connect_timeout_s: 2,
      keepalive_s: 5,
    }),
    ASSET,
    {},
  );
}

async function startNode(
  url: string,
  o: {
    primaryHostId?: string;
    bdSeq?: BdSeqStore;
    log?: CaptureLog;
    hostWaitReportMs?: number;
    node?: string;
  } = {},
) {
  const log = o.log ?? new CaptureLog();
  const outbox = await Outbox.open({ dir: join(res.tmpDir(), 'outbox') });
  const node = new SparkplugNode({
    mqtt: settings(url),
    ids: {
      groupId: GROUP,
      edgeNodeId: o.node ?? NODE,
      deviceId: ASSET,
      primaryHostId: o.primaryHostId,
      clientId: `tw-spb-${Math.random().toString(16).slice(2, 10)}`,
    },
    metrics: METRICS,
    outbox,
    bdSeq: o.bdSeq ?? new FileBdSeqStore(join(res.tmpDir(), 'bdseq.json'), log),
    log,
    agentVersion: '0.1.0-test',
    hostWaitReportMs: o.hostWaitReportMs,
  });
  node.start();
  res.defer(async () => {
    await node.stop();
    await outbox.close();
  });
  return { node, log, outbox };
}

async function broker(): Promise<Mosquitto> {
  const m = await Mosquitto.start();
  res.defer(() => m.dispose());
  return m;
}

async function recorder(url: string): Promise<HostRecorder> {
  const r = await HostRecorder.open(url, ['spBv1.0/#']);
  res.defer(() => r.close());
  return r;
}

function values(speed: number, amp = 3.9): Map<string, MetricValue> {
  const v = new Map<string, MetricValue>([['Speed', speed]]);
  for (const s of cfg.sensors) {
    v.set(`${s.id}/Overall`, 3.1);
    v.set(`${s.id}/1x Amplitude`, amp);
    v.set(`${s.id}/1x Phase`, 212.5);
    v.set(`${s.id}/Zone`, 'B');
    v.set(`${s.id}/Sensor OK`, true);
  }
  v.set('Machine Zone', 'B');
  v.set('Unbalance/Verdict', 'static');
  v.set('Unbalance/Confidence', 'high');
  v.set('Advisory/State', 'normal');
  v.set('Advisory/Outputs Energised', true);
  return v;
}

function event(i: number): AgentEvent {
  return {
    id: `spb-ev-${i}`,
    ts: new Date().toISOString(),
    asset: ASSET,
    type: 'zone_changed',
    severity: 'warning',
    step: i,
  };
}

const kind = (m: HostMessage) => m.topic.split('/')[2];
const metric = (m: HostMessage, name: string) => m.payload?.metrics?.find((x) => x.name === name);

/**
 * The session rules a host checks, over everything one edge node published, in arrival order
 * (one node on one broker connection: MQTT keeps its order). Returns the violations in words.
 */
function sessionViolations(
  msgs: readonly HostMessage[],
  group: string,
  node: string,
  device: string,
): string[] {
  const v: string[] = [];
  let inSession = false;
  let bdSeq: number | null = null;
  let deathSeen = false;
  let lastSeq: number | null = null;
  let deviceBorn = false;
  let aliases = new Set<number>();
  msgs.forEach((m, i) => {
    const at = `#${i} ${m.topic}`;
    if (m.error) return v.push(`${at}: python3-protobuf cannot decode it: ${m.error}`);
    const parts = m.topic.split('/');
    const k = parts[2];
    // tck-id-topic-structure, -namespace-a, -device-id-associated / -non-associated-message-types
    if (parts[0] !== 'spBv1.0' || parts[1] !== group || parts[3] !== node)
      v.push(`${at}: not spBv1.0/${group}/<type>/${node}`);
    const dev = ['DBIRTH', 'DDATA', 'DDEATH', 'DCMD'].includes(k);
    if (dev ? parts[4] !== device || parts.length !== 5 : parts.length !== 4)
      v.push(`${at}: device id ${dev ? 'missing or wrong' : 'must not be there'}`);
    if (m.retain) v.push(`${at}: retained (every edge node message must have retain false)`);
    const p = m.payload!;
    if (k === 'NDEATH') {
      // tck-id-payloads-ndeath-will-message-qos, -ndeath-seq, -topics-ndeath-payload
      if (m.qos !== 1) v.push(`${at}: NDEATH delivered at QoS ${m.qos}, the will must be QoS 1`);
      if (p.seq !== undefined) v.push(`${at}: NDEATH must not carry a seq`);
      if (p.metrics?.length !== 1 || p.metrics[0].name !== 'bdSeq')
        v.push(`${at}: NDEATH must hold only the bdSeq metric`);
      const b = p.metrics?.[0]?.long_value;
      if (inSession && b !== bdSeq)
        v.push(`${at}: NDEATH bdSeq ${b} does not match the session's NBIRTH bdSeq ${bdSeq}`);
      deathSeen = true;
      inSession = false;
      deviceBorn = false;
      return;
    }
    if (m.qos !== 0)
      v.push(
        `${at}: ${k} delivered at QoS ${m.qos}; births and data ` +
          `must be QoS 0 (tck-id-topics-${k.toLowerCase()}-mqtt)`,
      );
    if (typeof p.timestamp !== 'number') v.push(`${at}: no payload timestamp`);
    if (typeof p.seq !== 'number' || p.seq < 0 || p.seq > 255)
      return v.push(
        `${at}: seq missing or outside 0-255 (tck-id-payloads-sequence-num-always-included)`,
      );
    if (k === 'NBIRTH') {
      if (p.seq !== 0)
        v.push(`${at}: NBIRTH seq ${p.seq}, must be 0 (tck-id-topics-nbirth-seq-num)`);
      const b = metric(m, 'bdSeq');
      if (!b || typeof b.long_value !== 'number')
        v.push(`${at}: NBIRTH without a bdSeq metric (tck-id-topics-nbirth-bdseq-included)`);
      else {
        if (bdSeq !== null) {
          // a new CONNECT after a death, or a rebirth in the same connection
          const want = deathSeen ? (bdSeq + 1) % 256 : bdSeq;
          if (b.long_value !== want)
            v.push(
              `${at}: NBIRTH bdSeq ${b.long_value}, expected ` +
                `${want} ` +
                `(${deathSeen ? 'one more after a new CONNECT' : 'the same on a rebirth'})`,
            );
        }
        bdSeq = b.long_value;
      }
      const rb = metric(m, 'Node Control/Rebirth');
      if (!rb || rb.datatype !== 11 || rb.boolean_value !== false || rb.alias !== undefined)
        v.push(
          `${at}: 'Node Control/Rebirth' must be Boolean (11), ` +
            `false, without alias (tck-id-topics-nbirth-rebirth-metric)`,
        );
      inSession = true;
      deathSeen = false;
      deviceBorn = false;
      lastSeq = 0;
      return;
    }
    if (!inSession)
      return v.push(`${at}: ${k} outside a session (before any NBIRTH or after the NDEATH)`);
    // tck-id-payloads-sequence-num-incrementing
    if (p.seq !== (lastSeq! + 1) % 256) v.push(`${at}: seq ${p.seq} after ${lastSeq}`);
    lastSeq = p.seq;
    if (k === 'DBIRTH') {
      aliases = new Set();
      for (const x of p.metrics ?? []) {
        // tck-id-payloads-alias-birth-requirement, -alias-uniqueness, -metric-datatype-req,
        // -name-birth-data-requirement
        if (
          !x.name ||
          x.alias === undefined ||
          x.datatype === undefined ||
          x.timestamp === undefined
        )
          v.push(
            `${at}: DBIRTH metric ${x.name ?? x.alias} lacks name, alias, datatype or timestamp`,
          );
        if (x.alias !== undefined) {
          if (aliases.has(x.alias)) v.push(`${at}: alias ${x.alias} used twice`);
          aliases.add(x.alias);
        }
      }
      deviceBorn = true;
    } else if (k === 'DDATA') {
      if (!deviceBorn) v.push(`${at}: DDATA before the DBIRTH of this session`);
      for (const x of p.metrics ?? []) {
        // tck-id-payloads-alias-data-cmd-requirement, -name-birth-data-requirement
        if (x.name !== undefined) v.push(`${at}: DDATA metric carries its name (aliases only)`);
        if (x.alias === undefined || !aliases.has(x.alias))
          v.push(`${at}: DDATA alias ${x.alias} not in the DBIRTH`);
        if (x.timestamp === undefined) v.push(`${at}: DDATA metric without timestamp`);
        if (x.datatype !== undefined)
          v.push(
            `${at}: DDATA metric carries a datatype ` +
              `(tck-id-payloads-metric-datatype-not-req: SHOULD NOT)`,
          );
      }
    } else if (k === 'DDEATH') {
      deviceBorn = false;
    } else if (k !== 'NDATA') v.push(`${at}: unexpected message type ${k}`);
  });
  return v;
}

async function publishCmd(
  rec: HostRecorder,
  verb: 'NCMD' | 'DCMD',
  metrics: Array<Record<string, string | number | boolean>>,
  node = NODE,
): Promise<void> {
  const topic =
    verb === 'NCMD' ? `spBv1.0/${GROUP}/NCMD/${node}` : `spBv1.0/${GROUP}/DCMD/${node}/${ASSET}`;
  // NCMD/DCMD at QoS 0 as the specification asks of hosts (tck-id-topics-ncmd-mqtt); the recorder
  // publishes at 1, which an edge node must take as well.
  await rec.publish(topic, py.encode({ timestamp: Date.now(), metrics }));
}

describe('Sparkplug B edge node, as a host sees it (python3-protobuf decoder, real mosquitto)', () => {
  it('births, data, the will on a lost connection, rebirth on NCMD and seq wrapping follow the session rules', async () => {
    const m = await broker();
    const rec = await recorder(m.url);
    const { node, log } = await startNode(m.url);
    await until(() => rec.count('DBIRTH') >= 1, 10_000, 'first DBIRTH');
    node.update(values(1484.6));
    node.update(values(1484.6)); // unchanged: report by exception sends nothing
    node.update(values(1485.2));
    void node.queueEvent(event(1));
    await until(() => node.health().events_sent_total >= 1, 10_000, 'event sent');

    // A host asks for a rebirth (tck-id-operational-behavior-data-commands-ncmd-rebirth-*); then
    // unknown and malformed commands.
    await publishCmd(rec, 'NCMD', [{ name: 'Node Control/Rebirth', boolean_value: true }]);
    await until(() => rec.count('NBIRTH') >= 2, 10_000, 'NBIRTH after the rebirth request');
    await publishCmd(rec, 'NCMD', [{ name: 'Node Control/Reboot', boolean_value: true }]);
    await publishCmd(rec, 'DCMD', [{ alias: 2, double_value: 0 }]);
    await rec.publish(`spBv1.0/${GROUP}/NCMD/${NODE}`, Buffer.from([0xff, 0xff, 0xff]));
    await until(() => node.health().commands_refused_total >= 3, 10_000, 'three refused commands');
    const refusals = log.matching(/Sparkplug: NCMD|Sparkplug: DCMD/);
    expect(refusals.length).toBeGreaterThanOrEqual(1);
    expect(log.text()).toMatch(/"Node Control\/Reboot", which this node does not accept/);
    node.update(values(1486.0)); // still working after the refusals
    const before = rec.count('DDATA');
    await until(() => rec.count('DDATA') > before, 5000, 'DDATA after the refused commands');

    // The connection dies without DISCONNECT: the broker publishes the will (NDEATH); the node
    // reconnects with bdSeq + 1.
    (node as unknown as { client: { stream: { destroy(): void } } }).client.stream.destroy();
    await until(() => rec.count('NDEATH') >= 1, 15_000, 'NDEATH will');
    await until(() => rec.count('NBIRTH') >= 3, 15_000, 'NBIRTH after the reconnect');
    await until(() => rec.count('DBIRTH') >= 3, 15_000, 'DBIRTH after the reconnect');

    // 300 changes: seq wraps 255 -> 0 inside one session.
    for (let i = 0; i < 300; i++) node.update(values(1400 + i * 0.1));
    await until(() => rec.count('DDATA') >= before + 301, 15_000, '300 DDATA');
    await node.stop();
    await until(
      () => rec.count('NDEATH') >= 2 && rec.count('DDEATH') >= 1,
      5000,
      'DDEATH and NDEATH at stop',
    );

    // what the edge node published, not the host's own commands
    const msgs = py.decode(rec.messages.filter((x) => !/\/(NCMD|DCMD)\//.test(x.topic)));
    expect(sessionViolations(msgs, GROUP, NODE, ASSET)).toEqual([]);
    const order = msgs.map(kind);
    expect(order.slice(0, 2)).toEqual(['NBIRTH', 'DBIRTH']);
    const births = msgs
      .filter((x) => kind(x) === 'NBIRTH')
      .map((x) => metric(x, 'bdSeq')!.long_value);
    // first CONNECT 0; rebirth keeps it
    // (tck-id-operational-behavior-data-commands-rebirth-action-3); new CONNECT +1
    expect(births).toEqual([0, 0, 1]);
    const deaths = msgs
      .filter((x) => kind(x) === 'NDEATH')
      .map((x) => x.payload!.metrics![0].long_value);
    // the will of connection 0, the explicit NDEATH of connection 1 at stop
    expect(deaths).toEqual([0, 1]);
    expect(order.at(-1)).toBe('NDEATH');
    expect(order.at(-2)).toBe('DDEATH');
    expect(msgs.filter((x) => kind(x) !== 'NDEATH').some((x) => x.payload!.seq === 255)).toBe(true);

    // The DBIRTH: every metric with datatype, engineering unit and current value.
    const dbirth = msgs.filter((x) => kind(x) === 'DBIRTH').at(-1)!;
    const byName = new Map((dbirth.payload!.metrics ?? []).map((x) => [x.name!, x]));
    expect([...byName.keys()].sort()).toEqual(METRICS.map((d) => d.name).sort());
    expect(byName.get('Speed')!.datatype).toBe(10); // Double, Sparkplug 3.0 section 6.4.16
    expect(byName.get('DE-V/1x Phase')!.properties!.keys).toContain('engUnit');
    const unit = (n: string) =>
      byName.get(n)!.properties!.values[byName.get(n)!.properties!.keys.indexOf('engUnit')]
        .string_value;
    expect([
      unit('Speed'),
      unit('DE-V/Overall'),
      unit('DE-V/1x Amplitude'),
      unit('DE-V/1x Phase'),
    ]).toEqual(['rpm', 'mm/s', 'mm/s', 'deg']);
    expect(byName.get('DE-H/Sensor OK')!.datatype).toBe(11);
    // current value carried into the birth after the reconnect
    expect(byName.get('Unbalance/Verdict')!.string_value).toBe('static');
    expect(byName.get('Event')!.is_null).toBe(true);

    // Report by exception: the unchanged update sent nothing, the changed one only Speed.
    const firstData = msgs.filter((x) => kind(x) === 'DDATA');
    const speedAlias = METRICS.find((d) => d.name === 'Speed')!.alias;
    expect(firstData[1].payload!.metrics!.map((x) => x.alias)).toEqual([speedAlias]);
    expect(firstData[1].payload!.metrics![0].double_value).toBeCloseTo(1485.2, 9);
    // The live event: the Event alias, the event's JSON, not historical.
    const evAlias = METRICS.find((d) => d.name === 'Event')!.alias;
    const evMsg = firstData.find((x) => x.payload!.metrics![0].alias === evAlias)!;
    expect(JSON.parse(evMsg.payload!.metrics![0].string_value!).id).toBe('spb-ev-1');
    expect(evMsg.payload!.metrics![0].is_historical).toBeUndefined();
    console.info(
      `Sparkplug session: ${msgs.length} messages decoded by python3-protobuf, ` +
        `${births.length} NBIRTH, ${deaths.length} NDEATH, no rule broken`,
    );
  }, 90_000);

  it('events that waited through a broker outage go out as historical metrics with their own time, in order', async () => {
    const m = await broker();
    const { node } = await startNode(m.url);
    let rec = await HostRecorder.open(m.url, ['spBv1.0/#']);
    await until(() => node.isBorn(), 10_000, 'births');
    await rec.close();
    await m.stop();
    await until(() => !node.health().connected, 10_000, 'connection lost');
    const t0 = Date.now();
    for (let i = 10; i < 13; i++)
      await node.queueEvent({ ...event(i), ts: new Date(t0 - (13 - i) * 1000).toISOString() });
    await m.restart();
    rec = await HostRecorder.open(m.url, ['spBv1.0/#']);
    res.defer(() => rec.close());
    await until(() => node.health().events_sent_total >= 3, 20_000, 'the three waiting events');
    void node.queueEvent(event(20));
    await until(() => node.health().events_sent_total >= 4, 10_000, 'the live event');
    await until(() => rec.count('DDATA') >= 4, 5000, 'four event DDATA at the host');
    const msgs = py.decode(rec.messages).filter((x) => kind(x) === 'DDATA');
    const evs = msgs.map((x) => x.payload!.metrics![0]);
    expect(evs.map((x) => JSON.parse(x.string_value!).id)).toEqual([
      'spb-ev-10',
      'spb-ev-11',
      'spb-ev-12',
      'spb-ev-20',
    ]);
    expect(evs.map((x) => x.is_historical ?? false)).toEqual([true, true, true, false]);
    // Metric timestamp = the event's own time (when it happened), not the send time.
    expect(evs[0].timestamp).toBe(t0 - 3000);
    expect(evs[2].timestamp).toBe(t0 - 1000);
  }, 60_000);

  it('with a primary host: no births until its STATE says online, quiet (NDEATH) when it goes offline, said once per burst', async () => {
    const m = await broker();
    const rec = await recorder(m.url);
    const HOST = 'kessrow-scada'; // invented host id
    const stateTopic = `spBv1.0/STATE/${HOST}`;
    const { node, log } = await startNode(m.url, { primaryHostId: HOST, hostWaitReportMs: 400 });
    await until(() => node.health().connected, 10_000, 'connected');
    // the agent goes on measuring meanwhile
    for (let i = 0; i < 5; i++) node.update(values(1480 + i));
    await until(
      () => log.matching(/no online STATE from primary host "kessrow-scada"/).length >= 1,
      5000,
      'the wait said once',
    );
    await new Promise((r) => setTimeout(r, 600));
    expect(rec.count('NBIRTH')).toBe(0); // tck-id-message-flow-edge-node-birth-publish-subscribe
    // once per burst, not every 400 ms
    expect(log.matching(/no online STATE from primary host/)).toHaveLength(1);

    const t = Date.now();
    await rec.publish(stateTopic, JSON.stringify({ online: true, timestamp: t }), true);
    await until(() => rec.count('DBIRTH') >= 1, 10_000, 'births after the online STATE');
    // older than the last one: stale, ignored
    await rec.publish(stateTopic, JSON.stringify({ online: false, timestamp: t - 5000 }), false);
    await new Promise((r) => setTimeout(r, 300));
    expect(node.isBorn()).toBe(true);
    expect(rec.count('NDEATH')).toBe(0);

    await rec.publish(stateTopic, JSON.stringify({ online: false, timestamp: t + 1000 }), true);
    await until(() => rec.count('NDEATH') >= 1, 10_000, 'NDEATH when the host went offline');
    await until(
      () => node.health().connected && node.health().connects_total >= 2,
      10_000,
      'reconnected',
    );
    await new Promise((r) => setTimeout(r, 800));
    expect(rec.count('NBIRTH')).toBe(1); // quiet while the retained STATE says offline
    expect(log.matching(/went offline; ending this Sparkplug session/)).toHaveLength(1);

    await rec.publish(stateTopic, JSON.stringify({ online: true, timestamp: t + 2000 }), true);
    await until(() => rec.count('DBIRTH') >= 2, 10_000, 'births when the host is back');
    // the node's messages, not the host's STATE
    const msgs = py.decode(rec.messages.filter((x) => !x.topic.startsWith('spBv1.0/STATE/')));
    expect(sessionViolations(msgs, GROUP, NODE, ASSET)).toEqual([]);
    expect(
      msgs.filter((x) => kind(x) === 'NBIRTH').map((x) => metric(x, 'bdSeq')!.long_value),
    ).toEqual([0, 1]);
    const dbirth = msgs.filter((x) => kind(x) === 'DBIRTH').at(-1)!;
    // the latest value measured while quiet
    expect(metric(dbirth, 'Speed')!.double_value).toBe(1484);

    // A STATE that is not Sparkplug 3.0 JSON is refused in the log, nothing else happens.
    await rec.publish(stateTopic, 'ONLINE', false);
    await until(
      () => log.matching(/is not \{"online": true\|false/).length >= 1,
      5000,
      'bad STATE reported',
    );
    expect(node.isBorn()).toBe(true);
  }, 60_000);
});

describe('Sparkplug through the whole agent', () => {
  it('a synthesized fan going into zone D reaches the host as measured metrics, verdicts, advisory state and events (Sparkplug only)', async () => {
    const m = await broker();
    const rec = await recorder(m.url);
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const json = await TestSubscriber.open(m.url, [`${prefix}/#`]);
    res.defer(() => json.close());
    const fs = 5120;
    const step = 20;
    const ch = (pkBefore: number, pkAfter: number, phase: number) => ({
      orders: [
        { order: 1, velPk: pkBefore, phaseDeg: phase, untilS: step },
        { order: 1, velPk: pkAfter, phaseDeg: phase, fromS: step },
      ],
      noiseMmS2: 50,
    });
    // The signal the agent.test.ts fan uses: static unbalance growing from zone B to zone D at
    // 1485 r/min.
    const sig = synthesize({
      sampleRate: fs,
      seconds: 50,
      rpm: () => 1485,
      channels: [ch(2, 9, 40), ch(1.8, 8, 130), ch(2, 8.5, 45), ch(1.7, 7.5, 135)],
      tachChannel: 4,
    });
    const dir = res.tmpDir();
    const cfgA = validateConfig({
      machine: { id: ASSET, group: 2, support: 'rigid', rated_rpm: 1485 },
      tach: { channel: 4, trigger_v: 2.5 },
      sensors: [
        { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
        {
          id: 'DE-H',
          channel: 1,
          bearing: 'DE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
        {
          id: 'NDE-V',
          channel: 2,
          bearing: 'NDE',
          direction: 'vertical',
          sensitivity_mv_per_g: 100,
        },
        {
          id: 'NDE-H',
          channel: 3,
          bearing: 'NDE',
          direction: 'horizontal',
          sensitivity_mv_per_g: 100,
        },
      ],
      state_dir: join(dir, 'state'),
      mqtt: {
        url: m.url,
        topic_prefix: prefix,
        sparkplug: { group_id: GROUP, edge_node_id: NODE, json_topics: false },
      },
      advisory: { relay: { line: 17 }, lamp: { line: 27 } },
      watcher: { window_s: 5, on_delay_s: 10 },
    });
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const agent = new Agent({
      config: cfgA,
      source: new ArraySource(sig, fs, 2048, [], 15),
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: new CaptureLog(),
      gpio: new FakeGpioLines(),
      startMs: t0,
    });
    const sum = await agent.run(15_000);
    expect(sum.drained).toBe(true);
    await until(() => rec.count('NDEATH') >= 1, 5000, 'NDEATH at the end of the run');
    const msgs = py.decode(rec.messages);
    expect(sessionViolations(msgs, GROUP, NODE, ASSET)).toEqual([]);
    // The host's view: the last value of each metric, from the DBIRTH and the DDATA that followed.
    const dbirth = msgs.find((x) => kind(x) === 'DBIRTH')!;
    const nameOf = new Map((dbirth.payload!.metrics ?? []).map((x) => [x.alias!, x.name!]));
    const last = new Map<string, HostMetric>();
    const events: Array<{ type: string; historical: boolean }> = [];
    for (const x of msgs.filter((y) => kind(y) === 'DBIRTH' || kind(y) === 'DDATA')) {
      for (const mt of x.payload!.metrics ?? []) {
        const n = mt.name ?? nameOf.get(mt.alias!)!;
        if (n === 'Event' && mt.string_value)
          events.push({
            type: (JSON.parse(mt.string_value) as { type: string }).type,
            historical: mt.is_historical === true,
          });
        else last.set(n, mt);
      }
    }
    // Expected values: what the synthesized signal was built with (1485 r/min; 1x 9 mm/s pk at DE-V
    // after the step) and the agent.test.ts verdicts for it.
    expect(last.get('Speed')!.double_value!).toBeCloseTo(1485, 0);
    expect(last.get('DE-V/1x Amplitude')!.double_value!).toBeGreaterThan(9 * 0.95);
    expect(last.get('DE-V/1x Amplitude')!.double_value!).toBeLessThan(9 * 1.05);
    expect(last.get('Machine Zone')!.string_value).toBe('D');
    expect(last.get('Unbalance/Verdict')!.string_value).toBe('static');
    expect(last.get('Advisory/State')!.string_value).toBe('raised');
    expect(last.get('Advisory/Outputs Energised')!.boolean_value).toBe(false);
    expect(events.map((e) => e.type)).toContain('zone_changed');
    expect(events.map((e) => e.type)).toContain('advisory_raised');
    // json_topics: false
    expect(json.messages.filter((x) => x.topic.includes('/event/'))).toEqual([]);
    console.info(
      `through the agent: ${msgs.length} Sparkplug messages, ${events.length} events ` +
        `(${events.filter((e) => e.historical).length} historical)`,
    );
  }, 90_000);
});

describe('the session checker itself', () => {
  it('finds each kind of broken session it is meant to find', () => {
    const t = `spBv1.0/${GROUP}`;
    const nb = (seq: number, bd: number): HostMessage => ({
      topic: `${t}/NBIRTH/${NODE}`,
      qos: 0,
      retain: false,
      payload: {
        timestamp: 1,
        seq,
        metrics: [
          { name: 'bdSeq', datatype: 4, long_value: bd },
          { name: 'Node Control/Rebirth', datatype: 11, boolean_value: false },
        ],
      },
    });
    const db = (seq: number): HostMessage => ({
      topic: `${t}/DBIRTH/${NODE}/${ASSET}`,
      qos: 0,
      retain: false,
      payload: {
        timestamp: 1,
        seq,
        metrics: [{ name: 'Speed', alias: 1, datatype: 10, timestamp: 1, double_value: 1 }],
      },
    });
    const dd = (seq: number, extra: object = {}): HostMessage => ({
      topic: `${t}/DDATA/${NODE}/${ASSET}`,
      qos: 0,
      retain: false,
      payload: {
        timestamp: 1,
        seq,
        metrics: [{ alias: 1, timestamp: 1, double_value: 2, ...extra }],
      },
    });
    const death = (bd: number, qos = 1): HostMessage => ({
      topic: `${t}/NDEATH/${NODE}`,
      qos,
      retain: false,
      payload: { timestamp: 1, metrics: [{ name: 'bdSeq', datatype: 4, long_value: bd }] },
    });
    const check = (msgs: HostMessage[]) => sessionViolations(msgs, GROUP, NODE, ASSET);
    expect(check([nb(0, 0), db(1), dd(2), death(0), nb(0, 1), db(1)])).toEqual([]);
    expect(check([nb(0, 0), db(1), dd(3)]).join()).toMatch(/seq 3 after 1/);
    expect(check([nb(0, 0), dd(1)]).join()).toMatch(/DDATA before the DBIRTH/);
    expect(check([nb(0, 0), db(1), dd(2, { name: 'Speed' })]).join()).toMatch(/carries its name/);
    expect(check([nb(0, 0), db(1), dd(2, { alias: 9 })]).join()).toMatch(
      /alias 9 not in the DBIRTH/,
    );
    expect(check([nb(0, 0), death(0, 0)]).join()).toMatch(/NDEATH delivered at QoS 0/);
    expect(check([nb(0, 0), death(0), nb(0, 0)]).join()).toMatch(/bdSeq 0, expected 1/);
    expect(check([nb(0, 0), db(1), nb(0, 1)]).join()).toMatch(
      /bdSeq 1, expected 0 \(the same on a rebirth\)/,
    );
    expect(check([nb(5, 0)]).join()).toMatch(/NBIRTH seq 5/);
    expect(check([{ ...nb(0, 0), retain: true }]).join()).toMatch(/retained/);
    expect(check([{ ...nb(0, 0), qos: 1 }]).join()).toMatch(/QoS 1; births and data must be QoS 0/);
  });
});

describe('Sparkplug ids and bdSeq', () => {
  it('refuses group, edge node, device and host ids with the characters the specification reserves, naming the key', () => {
    const base = { url: 'mqtt://broker.plant.local:1883', topic_prefix: 'plant' };
    const cases: Array<[Record<string, string>, string, RegExp]> = [
      [
        { group_id: 'mill/line1', edge_node_id: 'n1' },
        'sparkplug.group_id',
        /group_id "mill\/line1" contains "\/"/,
      ],
      [{ group_id: 'g', edge_node_id: 'fan+1' }, 'sparkplug.edge_node_id', /contains "\+"/],
      [
        { group_id: 'g', edge_node_id: 'n', device_id: 'id#3' },
        'sparkplug.device_id',
        /contains "#"/,
      ],
      [
        { group_id: 'g', edge_node_id: 'n', primary_host_id: '' },
        'sparkplug.primary_host_id',
        /must not be empty/,
      ],
    ];
    for (const [sp, path, re] of cases) {
      const r = mqttSchema.safeParse({ ...base, sparkplug: sp });
      expect(r.success).toBe(false);
      const issue = r.error!.issues[0];
      expect(issue.path.join('.')).toBe(path);
      expect(issue.message).toMatch(re);
      expect(issue.message).toMatch(/reserves|empty/);
    }
    // Any other UTF-8 is fine (tck-id-topic-structure-namespace-valid-group-id).
    expect(
      mqttSchema.safeParse({
        ...base,
        sparkplug: { group_id: 'Kessrow Mühle', edge_node_id: 'ID-3A.edge_1' },
      }).success,
    ).toBe(true);
  });

  it('bdSeq goes up by one per CONNECT, wraps 255 -> 0 and is kept across restarts in a real file', () => {
    const dir = res.tmpDir();
    const file = join(dir, 'sparkplug-bdseq.json');
    const log = new CaptureLog();
    const a = new FileBdSeqStore(file, log);
    expect([a.next(), a.next(), a.next()]).toEqual([0, 1, 2]);
    const b = new FileBdSeqStore(file, log); // a restart
    expect(b.next()).toBe(3);
    writeFileSync(file, JSON.stringify({ next_bdseq: 255 }));
    const c = new FileBdSeqStore(file, log);
    expect([c.next(), c.next()]).toEqual([255, 0]);
    expect(JSON.parse(readFileSync(file, 'utf8')).next_bdseq).toBe(1);
    writeFileSync(file, '{"next_bdseq": 999}');
    expect(new FileBdSeqStore(file, log).next()).toBe(0);
    expect(log.matching(/not a whole number 0-255/)).toHaveLength(1);
  });
});

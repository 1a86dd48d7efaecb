import { mkdirSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { mqttSchema } from '../agent/config/mqtt.js';
import type { AgentEvent } from '../agent/events.js';
import { openPlantLink, type PlantLink } from '../agent/mqtt/plant-link.js';
import { nodeOutboxFs, type OutboxFs } from '../agent/outbox/fs.js';
import { recordName } from '../agent/outbox/outbox.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { livePayloadFromWindow } from '../agent/mqtt/live.js';
import { CaptureLog } from './support/capture-log.js';
import { testResources, uniquePrefix, until } from './support/harness.js';
import { Mosquitto, plainBroker } from './support/mosquitto.js';
import { assertMatches } from './support/payload-schemas.js';
import { TestSubscriber } from './support/subscriber.js';
import { HoldingProxy } from './support/tcp-proxy.js';

const ASSET = 'kessrow-id3a'; // invented demo fan (config/example.yaml)
const res = testResources('tw-state-');
const stateDir = res.tmpDir;
function fastMqtt(url: string, prefix: string, extra: Record<string, unknown> = {}) {
  return mqttSchema.parse({
    url,
    topic_prefix: prefix,
    reconnect_min_s: 0.1,
    reconnect_max_s: 0.5,
    connect_timeout_s: 2,
    ...extra,
  });
}
async function link(o: Parameters<typeof openPlantLink>[0]): Promise<PlantLink> {
  const l = await openPlantLink(o);
  res.defer(() => l.close());
  return l;
}
async function subscriber(
  url: string,
  filters: string[],
  sessionId?: string,
): Promise<TestSubscriber> {
  const s = await TestSubscriber.open(url, filters, { sessionId });
  res.defer(() => s.close());
  return s;
}
/** A DSP window as the DSP stage would hand it over (invented figures for the demo fan). */
const stats = {
  dc_v: 10.1,
  ac_rms_v: 0.05,
  min_v: 9.9,
  max_v: 10.3,
  clipped_samples: 0,
  samples: 51200,
};
const window: WindowResult = {
  start_index: 0,
  end_index: 51200,
  sample_rate_hz: 25600,
  speed_rpm: 1484.6,
  speed_min_rpm: 1484.1,
  speed_max_rpm: 1485.0,
  revolutions: 49,
  revolutions_rejected: 0,
  band_hz: { low: 10, high: 1000 },
  spectrum_segments: 3,
  spectrum_resolution_hz: 1,
  gap_samples: 0,
  tach: { edges: 50, missing_pulses: 0, double_triggers: 0, min_v: 0.1, max_v: 4.9 },
  channels: [
    {
      id: 'DE-V',
      channel: 0,
      bearing: 'DE',
      direction: 'vertical',
      mounting_angle_deg: 0,
      overall_rms_mm_s: 3.1,
      orders: {
        '1': { order: 1, freq_hz: 24.74, amp_pk_mm_s: 3.9, amp_rms_mm_s: 2.76, phase_deg: 212.5 },
      },
      one_x_share: 0.89,
      nonsync_peaks: [],
      stats,
    },
    {
      id: 'NDE-V',
      channel: 3,
      bearing: 'NDE',
      direction: 'vertical',
      mounting_angle_deg: 0,
      overall_rms_mm_s: null,
      orders: {},
      one_x_share: null,
      nonsync_peaks: [],
      stats,
    },
  ],
  warnings: [],
};
function testEvent(i: number, severity: AgentEvent['severity'] = 'warning'): AgentEvent {
  return {
    id: `ev-${String(i).padStart(4, '0')}`,
    ts: new Date().toISOString(),
    asset: ASSET,
    type: 'test_step',
    severity,
    step: i,
  };
}
/**
 * Ids in order of first arrival, and a check that every repeat is byte-identical to its first copy.
 */
function firstArrivals(sub: TestSubscriber, topicPrefix: string): string[] {
  const first = new Map<string, Buffer>();
  for (const m of sub.messages) {
    if (!m.topic.startsWith(topicPrefix)) continue;
    const id = (m.json as { id: string }).id;
    const seen = first.get(id);
    if (seen) expect(m.payload.equals(seen)).toBe(true);
    else first.set(id, m.payload);
  }
  return [...first.keys()];
}

describe('MQTT publishing against a real mosquitto', () => {
  it('publishes status, events in order, heartbeat and live messages that match the committed schemas', async () => {
    const broker = await plainBroker();
    res.defer(() => broker.dispose());
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    const sub = await subscriber(broker.url, [`${base}/#`]);
    const log = new CaptureLog();
    const l = await link({
      mqtt: fastMqtt(broker.url, prefix, { live_interval_s: 0.2 }),
      asset: ASSET,
      stateDir: stateDir(),
      log,
      health: () => ({ watcher_windows_total: 12 }),
      agentVersion: '0.1.0',
    });
    const severities = ['info', 'warning', 'alarm'] as const;
    for (let i = 0; i < 6; i++) void l.queueEvent(testEvent(i, severities[i % 3]));
    await sub.waitFor(
      (m) => m.filter((x) => x.topic === `${base}/event/test_step`).length >= 6,
      10_000,
      'six events',
    );
    await until(() => l.publisher.isConnected(), 5000, 'connection');
    const live = () =>
      livePayloadFromWindow(window, ASSET, new Date().toISOString(), (id) =>
        id === 'DE-V' ? { zone: 'B', ok: true } : undefined,
      );
    expect(l.publishLive(live)).toBe(true);
    expect(l.publishLive(live)).toBe(false); // within live_interval_s
    await sub.waitFor(
      (m) =>
        m.some((x) => x.topic === `${base}/live`) &&
        m.some((x) => x.topic === `${base}/heartbeat`) &&
        m.some((x) => x.topic === `${base}/status`),
      10_000,
      'live, heartbeat and status',
    );

    const events = sub.on(`${base}/event/test_step`);
    expect(events.map((m) => (m.json as { id: string }).id)).toEqual([
      'ev-0000',
      'ev-0001',
      'ev-0002',
      'ev-0003',
      'ev-0004',
      'ev-0005',
    ]);
    for (const m of events) assertMatches('event.v1', m.json);
    const status = sub.on(`${base}/status`)[0]!;
    assertMatches('status.v1', status.json);
    expect(status.json).toMatchObject({ online: true, reason: 'connected', asset: ASSET });
    const hb = sub.on(`${base}/heartbeat`)[0]!;
    assertMatches('heartbeat.v1', hb.json);
    expect(hb.json).toMatchObject({
      agent: { watcher_windows_total: 12 },
      mqtt: { connects_total: 1 },
    });
    // The agent part types the fields it declares and still takes others (a compatible extension of
    // v1).
    const withAgent = (agent: Record<string, unknown>) => ({ ...(hb.json as object), agent });
    assertMatches(
      'heartbeat.v1',
      withAgent({
        windows: 40,
        gaps: 0,
        source_crc_errors: 2,
        gpio_speed_check: 'agree',
        some_future_stage_total: 1,
      }),
    );
    expect(() => assertMatches('heartbeat.v1', withAgent({ windows: 'many' }))).toThrow(
      /agent\.windows/,
    );
    expect(() => assertMatches('heartbeat.v1', withAgent({ gpio_speed_check: 'maybe' }))).toThrow(
      /agent\.gpio_speed_check/,
    );
    expect(() => assertMatches('heartbeat.v1', withAgent({ nested: { a: 1 } }))).toThrow(
      /agent\.nested/,
    );
    const liveMsg = sub.on(`${base}/live`)[0]!.json;
    assertMatches('live.v1', liveMsg);
    expect(liveMsg).toMatchObject({
      speed_rpm: 1484.6,
      channels: [
        {
          id: 'DE-V',
          overall_rms_mm_s: 3.1,
          one_x_amp_pk_mm_s: 3.9,
          one_x_phase_deg: 212.5,
          zone: 'B',
          ok: true,
        },
        { id: 'NDE-V', one_x_amp_pk_mm_s: null, zone: null, ok: null },
      ],
    });
    // The schema check can fail: a wrong severity or a missing id is refused.
    expect(() =>
      assertMatches('event.v1', { ...(events[0]!.json as object), severity: 'fatal' }),
    ).toThrow(/severity/);
    expect(() =>
      assertMatches('event.v1', { ...(events[0]!.json as object), id: undefined }),
    ).toThrow(/id/);

    // The status is retained: a subscriber arriving later still learns the agent is online.
    const late = await subscriber(broker.url, [`${base}/status`]);
    await late.waitFor((m) => m.length > 0, 5000, 'retained status');
    expect(late.messages[0]).toMatchObject({ retain: true, json: { online: true } });

    await until(() => l.outbox.size === 0, 5000, 'outbox to empty');
    await l.outbox.settled();
    expect(readdirSync(l.outbox.dir).filter((n) => n.endsWith('.rec'))).toEqual([]);
    await l.close();
    await late.waitFor(
      (m) => m.some((x) => (x.json as { online: boolean }).online === false),
      5000,
      'offline status',
    );
    expect(late.messages.at(-1)!.json).toMatchObject({ online: false, reason: 'stopped' });
    assertMatches('status.v1', late.messages.at(-1)!.json);
  });

  it('loses nothing and keeps order when the broker restarts mid-stream', async () => {
    const broker = await Mosquitto.start();
    res.defer(() => broker.dispose());
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    const sub = await subscriber(
      broker.url,
      [`${base}/event/#`],
      `tw-plant-${Math.random().toString(36).slice(2, 8)}`,
    );
    const log = new CaptureLog();
    const l = await link({
      mqtt: fastMqtt(broker.url, prefix),
      asset: ASSET,
      stateDir: stateDir(),
      log,
    });
    await until(() => l.publisher.isConnected(), 5000, 'first connection');
    const N = 60;
    let restarted: Promise<void> | null = null;
    for (let i = 0; i < N; i++) {
      void l.queueEvent(testEvent(i));
      if (i === 20) restarted = broker.restart();
      await new Promise((r) => setTimeout(r, 15));
    }
    await restarted;
    await sub.waitFor(
      () => new Set(sub.messages.map((m) => (m.json as { id: string }).id)).size >= N,
      20_000,
      `all ${N} events`,
    );
    const order = firstArrivals(sub, `${base}/event/`);
    expect(order).toEqual(Array.from({ length: N }, (_, i) => `ev-${String(i).padStart(4, '0')}`));
    await until(() => l.outbox.size === 0, 5000, 'outbox to empty');
    const h = l.publisher.health();
    expect(h.connects_total).toBeGreaterThanOrEqual(2);
    // Said once per burst: one "lost the connection" line, however many attempts failed meanwhile.
    expect(log.matching(/lost the connection/, 'warn')).toHaveLength(1);
    expect(log.matching(/^connected to .* after \d+ failed attempt/, 'info')).toHaveLength(1);
  });

  it('starts with the broker down, keeps events on disk across an agent restart, and delivers them in order once the broker appears', async () => {
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    // The plant side subscribes with a persistent session first, then the broker goes away.
    const broker = await Mosquitto.start();
    res.defer(() => broker.dispose());
    const sub = await subscriber(
      broker.url,
      [`${base}/event/#`],
      `tw-plant-${Math.random().toString(36).slice(2, 8)}`,
    );
    await broker.stop();

    const dir = stateDir();
    const log1 = new CaptureLog();
    const first = await openPlantLink({
      mqtt: fastMqtt(broker.url, prefix),
      asset: ASSET,
      stateDir: dir,
      log: log1,
    });
    for (let i = 0; i < 8; i++)
      expect(await first.queueEvent(testEvent(i, i === 5 ? 'alarm' : 'info'))).toBe('durable');
    await until(
      () => first.publisher.health().connect_failures_total >= 3,
      5000,
      'three failed attempts',
    );
    expect(log1.matching(/nothing accepts connections/, 'warn')).toHaveLength(1); // once per burst
    expect(await first.close()).toBe(0); // nothing held only in memory
    expect(readdirSync(join(dir, 'outbox')).filter((n) => n.endsWith('.rec'))).toHaveLength(8);

    // The agent starts again with 8 events waiting, adds one, and the broker comes back.
    const second = await link({
      mqtt: fastMqtt(broker.url, prefix),
      asset: ASSET,
      stateDir: dir,
      log: new CaptureLog(),
    });
    void second.queueEvent(testEvent(8));
    await new Promise((r) => setTimeout(r, 300));
    await broker.restart();
    await until(() => second.outbox.size === 0, 10_000, 'outbox to drain');
    await second.outbox.settled();
    expect(readdirSync(join(dir, 'outbox')).filter((n) => n.endsWith('.rec'))).toEqual([]);
    await sub.waitFor((m) => m.length >= 9, 10_000, 'nine events at the plant side');
    expect(firstArrivals(sub, `${base}/event/`)).toEqual(
      Array.from({ length: 9 }, (_, i) => `ev-${String(i).padStart(4, '0')}`),
    );
  });

  it('rebuilds the connection when a PUBACK does not come back in time, then delivers (same ids)', async () => {
    const broker = await plainBroker();
    res.defer(() => broker.dispose());
    const port = Number(new URL(broker.url).port);
    const proxy = await HoldingProxy.start(port);
    res.defer(() => proxy.close());
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    const sub = await subscriber(broker.url, [`${base}/event/#`]);
    const log = new CaptureLog();
    const l = await link({
      mqtt: fastMqtt(proxy.url, prefix, { publish_timeout_s: 1, connect_timeout_s: 1 }),
      asset: ASSET,
      stateDir: stateDir(),
      log,
    });
    await until(() => l.publisher.isConnected(), 5000, 'connection');
    proxy.holdReplies = true;
    for (let i = 0; i < 3; i++) void l.queueEvent(testEvent(i, 'alarm'));
    await sub.waitFor((m) => m.length >= 3, 5000, 'the three events at the broker');
    await until(() => l.publisher.health().publish_timeouts_total >= 1, 5000, 'a publish timeout');
    expect(l.outbox.size).toBe(3); // no PUBACK reached the agent: nothing deleted
    proxy.holdReplies = false;
    await until(() => l.outbox.size === 0, 10_000, 'outbox to drain after the link recovers');
    expect(firstArrivals(sub, `${base}/event/`)).toEqual(['ev-0000', 'ev-0001', 'ev-0002']);
    expect(sub.messages.length).toBeGreaterThanOrEqual(3);
    expect(log.matching(/not acknowledged within 1 s/, 'warn').length).toBeGreaterThanOrEqual(1);
  });

  it('full disk under state_dir: keeps publishing from memory, reports it once as an event, recovers by itself (injected ENOSPC)', async () => {
    const broker = await plainBroker();
    res.defer(() => broker.dispose());
    const prefix = uniquePrefix();
    const base = `${prefix}/${ASSET}`;
    const sub = await subscriber(broker.url, [`${base}/event/#`]);
    const dir = stateDir();
    // A damaged record left by an earlier run is quarantined and reported, not fatal.
    mkdirSync(join(dir, 'outbox'), { recursive: true });
    writeFileSync(join(dir, 'outbox', recordName(1)), 'twob1 00000000 5\nhello\n');
    let full = false;
    const fs: OutboxFs = {
      ...nodeOutboxFs,
      writeNewSynced: async (f, d) => {
        if (full)
          throw Object.assign(new Error('ENOSPC: no space left on device, write'), {
            code: 'ENOSPC',
          });
        await nodeOutboxFs.writeNewSynced(f, d);
      },
    };
    const log = new CaptureLog();
    const l = await link({
      mqtt: fastMqtt(broker.url, prefix),
      asset: ASSET,
      stateDir: dir,
      log,
      fs,
    });
    await sub.waitFor(
      (m) => m.some((x) => x.topic === `${base}/event/outbox_record_quarantined`),
      10_000,
      'the quarantine event',
    );
    full = true;
    for (let i = 0; i < 5; i++) expect(await l.queueEvent(testEvent(i, 'alarm'))).toBe('memory');
    await sub.waitFor(
      (m) => m.filter((x) => x.topic === `${base}/event/test_step`).length >= 5,
      10_000,
      'events published from memory',
    );
    // the outbox retries (1 s, 2 s ...) and fails again
    await new Promise((r) => setTimeout(r, 2500));
    full = false;
    await sub.waitFor(
      (m) => m.some((x) => x.topic === `${base}/event/outbox_store_recovered`),
      10_000,
      'the recovery event',
    );
    const types = sub.messages.map((x) => (x.json as { type: string }).type);
    expect(types.filter((t) => t === 'outbox_store_failed')).toHaveLength(1);
    expect(
      log.matching(/cannot save events under the state directory \(ENOSPC/, 'warn'),
    ).toHaveLength(1);
    for (const m of sub.messages.filter((x) =>
      (x.json as { type: string }).type.startsWith('outbox_'),
    ))
      assertMatches('event-outbox.v1', m.json);
    expect(
      sub.messages.find((x) => x.topic.endsWith('/outbox_record_quarantined'))!.json,
    ).toMatchObject({ problem: expect.stringMatching(/checksum|cut short|trailing/) });
    expect(firstArrivals(sub, `${base}/event/test_step`)).toEqual([
      'ev-0000',
      'ev-0001',
      'ev-0002',
      'ev-0003',
      'ev-0004',
    ]);
    expect(l.outbox.health()).toMatchObject({ store_ok: true, quarantined_total: 1 });
  });
});

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { ManualClock } from '../agent/clock.js';
import { validateConfig } from '../agent/config/load.js';
import { MemoryLogger } from '../agent/log.js';
import { Agent } from '../agent/runtime/agent.js';
import { ArraySource } from './support/array-source.js';
import { plainBroker } from './support/mosquitto.js';
import { TestSubscriber } from './support/subscriber.js';
import { synthesize } from './support/synth.js';

/** A plant with several fans: each board is an independent agent on the plant's one broker. */
describe('fleet: several agents on one broker', () => {
  let broker: { url: string; dispose(): Promise<void> };
  beforeAll(async () => {
    broker = await plainBroker();
  });
  afterAll(async () => {
    await broker?.dispose();
  });

  it('keeps every asset under its own topics and none disturbs another', async () => {
    const fs = 5120;
    const site = `plant-${Math.random().toString(16).slice(2)}/boilerhouse`;
    const assets = ['id-fan-3a', 'id-fan-3b', 'fd-fan-3'];
    const sub = await TestSubscriber.open(broker.url, [`${site}/#`]);
    const t0 = Date.UTC(2026, 11, 2, 7, 0, 0);
    const runs = assets.map((asset, i) => {
      // Each fan in its own state: the second is in zone D from the start.
      const pk = i === 1 ? 9 : 1.5;
      const sig = synthesize({
        sampleRate: fs,
        seconds: 40,
        rpm: () => 1485 - 3 * i,
        channels: [
          { orders: [{ order: 1, velPk: pk, phaseDeg: 30 }] },
          { orders: [{ order: 1, velPk: pk * 0.9, phaseDeg: 120 }] },
        ],
        tachChannel: 2,
        seed: i + 1,
      });
      const cfg = validateConfig({
        machine: { id: asset, group: 2, support: 'rigid', rated_rpm: 1485 },
        tach: { channel: 2, trigger_v: 2.5 },
        sensors: [
          {
            id: 'DE-V',
            channel: 0,
            bearing: 'DE',
            direction: 'vertical',
            sensitivity_mv_per_g: 100,
          },
          {
            id: 'DE-H',
            channel: 1,
            bearing: 'DE',
            direction: 'horizontal',
            sensitivity_mv_per_g: 100,
          },
        ],
        state_dir: mkdtempSync(join(tmpdir(), `tw-fleet-${asset}-`)),
        mqtt: { url: broker.url, topic_prefix: site },
        watcher: { window_s: 5, on_delay_s: 5 },
      });
      return new Agent({
        config: cfg,
        source: new ArraySource(sig, fs, 2048, [], 10),
        boardTimesTach: false,
        clock: new ManualClock(t0),
        logger: new MemoryLogger(),
        startMs: t0,
      }).run(10_000);
    });
    const sums = await Promise.all(runs);
    for (const s of sums) expect(s.drained).toBe(true);
    await sub.waitFor(
      (m) =>
        assets.every((a) =>
          m.some(
            (x) =>
              x.topic === `${site}/${a}/status` &&
              (x.json as { reason?: string }).reason === 'stopped',
          ),
        ),
      10_000,
      'a "stopped" status from every agent',
    );
    for (const a of assets) {
      const status = sub
        .on(`${site}/${a}/status`)
        .map((m) => m.json as { online: boolean; reason: string; asset: string });
      expect(status.map((s) => s.reason)).toEqual(['connected', 'stopped']);
      expect(status.map((s) => s.online)).toEqual([true, false]);
      expect(status.every((s) => s.asset === a)).toBe(true);
      const events = sub.messages
        .filter((m) => m.topic.startsWith(`${site}/${a}/event/`))
        .map((m) => m.json as { asset: string; type: string; zone?: string });
      expect(events.every((e) => e.asset === a)).toBe(true);
      const zoneD = events.some((e) => e.type === 'zone_changed' && e.zone === 'D');
      expect(zoneD).toBe(a === 'id-fan-3b');
    }
    await sub.close();
  });
});

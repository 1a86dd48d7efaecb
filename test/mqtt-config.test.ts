import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { mqttCommand } from '../agent/cli/commands/mqtt.js';
import { loadConfig, validateConfig } from '../agent/config/load.js';
import { mqttSchema } from '../agent/config/mqtt.js';
import { recordName } from '../agent/outbox/outbox.js';
import { encodeRecord } from '../agent/outbox/record.js';
import { renderPayloadSchemas } from '../agent/mqtt/payloads.js';
import { topicsFor } from '../agent/mqtt/topics.js';
import { livePayloadFromFrame } from '../agent/mqtt/live.js';
import { assertMatches } from './support/payload-schemas.js';

const SCHEMA_DIR = join(import.meta.dirname, '..', 'config', 'schemas', 'mqtt');
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
  vi.restoreAllMocks();
});

describe('MQTT payload schema files', () => {
  it('are committed and up to date with the zod sources (regenerate: npm run schemas:mqtt)', () => {
    const rendered = renderPayloadSchemas();
    expect(readdirSync(SCHEMA_DIR).sort()).toEqual([...rendered.keys()].sort());
    for (const [name, text] of rendered)
      expect(readFileSync(join(SCHEMA_DIR, name), 'utf8'), name).toBe(text);
  });
});

describe('mqtt and advisory config sections', () => {
  it('are optional: the example without them stays valid', () => {
    const cfg = loadConfig('config/example.yaml');
    expect(cfg.mqtt).toBeUndefined();
    expect(cfg.advisory).toBeUndefined();
  });

  it('load from the network example with defaults filled in', () => {
    const cfg = loadConfig('config/example-network.yaml');
    expect(cfg.mqtt).toMatchObject({
      url: 'mqtts://broker.kessrow.invalid:8883',
      topic_prefix: 'kessrow/boiler3',
      inflight_window: 8,
      publish_timeout_s: 15,
      outbox_max_events: 5000,
    });
    expect(cfg.advisory).toMatchObject({
      zone: 'D',
      min_channels: 2,
      hold_s: 3,
      stall_s: 60,
      relay: { line: 17, active_low: false },
    });
    expect(cfg.gpio).toEqual({
      tach_speed: {
        line: 23,
        active_low: false,
        pulses_per_rev: 1,
        average_revs: 4,
        tolerance_pct: 5,
      },
    });
  });

  it('name each mistake with its path', () => {
    const raw = loadConfig('config/example.yaml');
    const bad = {
      ...raw,
      mqtt: {
        url: 'mqtt://broker:1883',
        topic_prefix: 'plant/#',
        tls: { ca_file: 'ca.pem' },
        password: { file: 'a', env: 'B' },
        qos: 2,
      },
    };
    expect(() => validateConfig(bad, 'cfg.yaml')).toThrow(/mqtt: unknown key\(s\) "qos"/);
    const { qos: _q, ...noQos } = bad.mqtt;
    const msg = (() => {
      try {
        validateConfig({ ...raw, mqtt: noQos }, 'cfg.yaml');
      } catch (e) {
        return (e as Error).message;
      }
      return '';
    })();
    expect(msg).toMatch(/mqtt\.topic_prefix: levels separated by "\/", none empty, no "\+", "#"/);
    // cross-key rules run once each key is valid on its own
    const msg2 = (() => {
      try {
        validateConfig({ ...raw, mqtt: { ...noQos, topic_prefix: 'plant/site1' } }, 'cfg.yaml');
      } catch (e) {
        return (e as Error).message;
      }
      return '';
    })();
    expect(msg2).toMatch(/mqtt\.tls: tls settings need an mqtts:\/\/ url/);
    expect(msg2).toMatch(/mqtt\.password: give exactly one of file or env/);
    expect(msg2).toMatch(/mqtt\.password: a password needs mqtt\.username/);
    expect(
      mqttSchema.safeParse({ url: 'http://broker', topic_prefix: 'p' }).error!.issues[0]!.message,
    ).toMatch(/scheme "http" is not supported/);
  });
});

describe('topic layout', () => {
  it('puts everything under <prefix>/<asset>', () => {
    const t = topicsFor('kessrow/boiler3', 'kessrow-id3a');
    expect([t.status, t.heartbeat, t.live, t.cmd, t.cmdReply, t.event('advisory_raised')]).toEqual([
      'kessrow/boiler3/kessrow-id3a/status',
      'kessrow/boiler3/kessrow-id3a/heartbeat',
      'kessrow/boiler3/kessrow-id3a/live',
      'kessrow/boiler3/kessrow-id3a/cmd',
      'kessrow/boiler3/kessrow-id3a/cmd/reply',
      'kessrow/boiler3/kessrow-id3a/event/advisory_raised',
    ]);
    expect(t.event('bad/type+#')).toBe('kessrow/boiler3/kessrow-id3a/event/other');
  });
});

describe('turnwise mqtt outbox', () => {
  it('lists waiting events and quarantined files, as a table or as JSON', async () => {
    const d = mkdtempSync(join(tmpdir(), 'tw-cli-'));
    dirs.push(d);
    const ob = join(d, 'state', 'outbox');
    mkdirSync(join(ob, 'quarantine'), { recursive: true });
    writeFileSync(
      join(ob, recordName(3)),
      encodeRecord(
        JSON.stringify({
          id: 'e-3',
          ts: '2025-03-01T10:00:00.000Z',
          asset: 'kessrow-id3a',
          type: 'zone_change',
          severity: 'alarm',
        }),
      ),
    );
    writeFileSync(join(ob, 'quarantine', `${recordName(2)}.2025-03-01T09-00-00-000Z`), 'junk');
    const cfgText = readFileSync('config/example.yaml', 'utf8').replace(
      'state_dir: ./state',
      `state_dir: ${join(d, 'state')}\nmqtt: { url: ` +
        `"mqtt://127.0.0.1:1883", topic_prefix: kessrow/boiler3 }`,
    );
    writeFileSync(join(d, 'cfg.yaml'), cfgText);
    let out = '';
    vi.spyOn(process.stdout, 'write').mockImplementation((s) => {
      out += String(s);
      return true;
    });
    expect(await mqttCommand.run(['outbox', '--config', join(d, 'cfg.yaml')])).toBe(0);
    expect(out).toMatch(/1 event\(s\) waiting, 1 quarantined file\(s\)/);
    expect(out).toMatch(
      /0000000000000003\.rec {2}alarm {4}zone_change {2}2025-03-01T10:00:00\.000Z {2}id e-3/,
    );
    out = '';
    expect(await mqttCommand.run(['outbox', '--config', join(d, 'cfg.yaml'), '--json'])).toBe(0);
    expect(JSON.parse(out)).toMatchObject({
      pending: [{ id: 'e-3', severity: 'alarm', type: 'zone_change' }],
      quarantined: [expect.stringMatching(/^0000000000000002\.rec\./)],
    });
  });
});

describe('live message from the per-revolution vectors', () => {
  it('takes 1x from the frame, bearing and direction from the config, and matches live.v1', () => {
    const sensors = loadConfig('config/example.yaml').sensors;
    const x1 = { order: 1, freq_hz: 24.75, amp_pk_mm_s: 4.2, amp_rms_mm_s: 2.97, phase_deg: 118 };
    const p = livePayloadFromFrame(
      {
        sample_index: 25600,
        speed_rpm: 1485,
        revolutions_weight: 7.5,
        age_s: 0.04,
        channels: [
          { id: 'NDE-H', orders: { '1': x1 } },
          { id: 'DE-A', orders: {} },
        ],
      },
      sensors,
      null,
      'kessrow-id3a',
      '2025-03-01T10:00:00.000Z',
    );
    assertMatches('live.v1', p);
    expect(p.channels).toEqual([
      {
        id: 'NDE-H',
        bearing: 'NDE',
        direction: 'horizontal',
        overall_rms_mm_s: null,
        one_x_amp_pk_mm_s: 4.2,
        one_x_phase_deg: 118,
        zone: null,
        ok: null,
      },
      {
        id: 'DE-A',
        bearing: 'DE',
        direction: 'axial',
        overall_rms_mm_s: null,
        one_x_amp_pk_mm_s: null,
        one_x_phase_deg: null,
        zone: null,
        ok: null,
      },
    ]);
  });
});
